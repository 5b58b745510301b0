"""Input and output: catalogue reading and validation, ledger, exports, plots."""
from rhofollow.io.catalogue import CatalogueError, read_catalogue

__all__ = ["CatalogueError", "read_catalogue"]
