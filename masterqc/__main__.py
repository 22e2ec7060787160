import sys

from masterqc.cli import main

sys.exit(main())
