import sys

from tdse.cli import main

sys.exit(main())
