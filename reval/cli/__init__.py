"""The `reval` command line (argparse and rich rendering only; every action is in reval.service)."""
from reval.cli.main import main

__all__ = ["main"]
