"""Measurement systems analysis: is the station itself trustworthy (check standards, gauge R&R)."""
