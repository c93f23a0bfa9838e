"""What is asked: the spec (``model``: its sections, SpecError, loading), the field types of its
numbers (``fieldtypes``) and the ranges of a run's settings (``limits``).

Above ``stock`` (a spec names series and dielectrics), below ``circuits``.
"""
