"""Run the command line as ``python -m tonewright``."""

from tonewright.cli import main

main()
