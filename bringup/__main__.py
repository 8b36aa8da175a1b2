import sys

from bringup.cli import main

sys.exit(main())
