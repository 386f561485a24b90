"""Design proposals: detuning, sizing, time in step, the recommended case file."""
