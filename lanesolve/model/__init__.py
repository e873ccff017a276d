"""The model stage: the Network and Result data, the optimisation model, its solvers, sensitivity, the no-plan diagnosis and what-if scenarios."""
