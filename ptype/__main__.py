import sys

from ptype.cli import main

sys.exit(main())
