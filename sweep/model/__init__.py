"""The registries: strategies, output variables and feasibility codes; what the cube's labels mean."""
