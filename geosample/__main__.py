"""``python -m geosample`` runs the command line."""
from geosample.cli import run

run()
