import sys

from bandwright.cli import main

sys.exit(main())
