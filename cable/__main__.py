import sys

from cable.cli import main

sys.exit(main())
