import sys

from acquire.cli import main

sys.exit(main())
