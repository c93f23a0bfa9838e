"""The physics: topologies and their building blocks (rails and op-amp terms, the comparator's
edge, the single-pole integrator, the loop's timing, the timing network, checks)."""
