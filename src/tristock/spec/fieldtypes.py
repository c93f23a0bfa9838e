"""Field types for request models: strict, finite numbers and floors that say why.

A TOML or JSON author's ``true`` or ``"12"`` is never read as a number (pydantic's lax mode
would read them as 1 and 12); a model using these types also sets ``allow_inf_nan=False`` so
that every number is finite. ``AtLeast`` refuses a value below a floor with the reason, and
carries the floor into the JSON schema as ``minimum``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Annotated, Any

from pydantic import BeforeValidator, GetCoreSchemaHandler, GetJsonSchemaHandler
from pydantic_core import core_schema


def kind_of(value: Any) -> str:
    """What a refused value is, in the words of a TOML or JSON author."""
    if isinstance(value, bool):
        return f"a boolean ({str(value).lower()})"
    if isinstance(value, str):
        text = value if len(value) <= 40 else value[:37] + "..."
        return f"a string ({text!r})"
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list | tuple):
        return "an array"
    if value is None:
        return "null"
    if isinstance(value, int | float):
        return repr(value)
    return type(value).__name__


def strict_number(value: Any) -> Any:
    """Only integers and floats are numbers: a boolean or a string is refused, never read."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise ValueError(f"expected a number, got {kind_of(value)}")
    return value


def auto_or_count(value: Any) -> Any:
    """``"auto"`` or a whole number; booleans, other strings and fractions refused."""
    if value == "auto" and isinstance(value, str):
        return value
    number = not isinstance(value, bool) and isinstance(value, int | float)
    if not number or not float(value).is_integer():
        raise ValueError(f'expected "auto" or a count 1..8, got {kind_of(value)}')
    return int(value)


@dataclass(frozen=True)
class AtLeast:
    """A floor below which the physics has nothing to work with: the message says why, and
    the JSON schema carries it as ``minimum``. Use as ``Annotated[Number, AtLeast(...)]``."""

    least: float
    unit: str
    why: str

    def check(self, value: float) -> float:
        if not value >= self.least:
            suffix = f" {self.unit}" if self.unit else ""
            raise ValueError(f"{value:g}{suffix} is below {self.least:g}{suffix}: {self.why}")
        return value

    def __get_pydantic_core_schema__(
        self, source: Any, handler: GetCoreSchemaHandler
    ) -> core_schema.CoreSchema:
        return core_schema.no_info_after_validator_function(self.check, handler(source))

    def __get_pydantic_json_schema__(
        self, schema: core_schema.CoreSchema, handler: GetJsonSchemaHandler
    ) -> dict[str, Any]:
        return {**handler(schema), "minimum": self.least}


#: A number (TOML/JSON integer or float; booleans and strings refused). Finite when the model
#: sets ``allow_inf_nan=False``.
Number = Annotated[float, BeforeValidator(strict_number)]
#: A whole number (an integral float such as 100.0 is accepted; booleans and strings refused).
Count = Annotated[int, BeforeValidator(strict_number)]
