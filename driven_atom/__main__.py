import sys

from driven_atom.cli import main

sys.exit(main())
