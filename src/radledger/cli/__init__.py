"""The ``radledger`` command: arguments, exit codes, signals (main.py) and all console text (console.py)."""

from .main import main

__all__ = ["main"]
