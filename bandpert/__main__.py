"""``python -m bandpert`` runs the command line."""

from .cli.app import main

if __name__ == "__main__":  # worker processes of a local Dask cluster import this module too
    main()
