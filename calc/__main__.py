"""``python -m calc`` runs the relsheet command line."""

from .cli import run

run()
