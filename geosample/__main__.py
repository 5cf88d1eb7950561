"""``python -m geosample`` runs the command line."""
from geosample.cli import run

if __name__ == "__main__":  # guarded: Dask worker processes may import this module
    run()
