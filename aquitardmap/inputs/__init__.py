"""Borehole logs, the project store of logs, hazards: reading and checking the inputs."""
