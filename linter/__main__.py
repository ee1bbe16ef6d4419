"""``python -m prefit``."""

from .cli import run

run()
