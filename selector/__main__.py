"""``python -m selector``."""
from .cli import entry

entry()
