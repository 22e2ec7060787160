import sys

from masterqc.cli import run

sys.exit(run())
