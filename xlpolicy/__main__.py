"""Allow ``python -m xlpolicy``."""

from .cli import main

main()
