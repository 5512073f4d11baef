"""Command functions: each takes plain values, returns an exit code, and prints nothing
itself except through the streams it is given (click lives only in ``cli.py``)."""
