"""What every stage stands on: constants, the project's errors, time scales, WGS-84
geodesy and the signal definitions."""
