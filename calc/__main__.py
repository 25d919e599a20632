"""``python -m calc`` runs the relsheet command line."""

from .interfaces.cli import run

run()
