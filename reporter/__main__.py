import sys

from reporter.cli import main

sys.exit(main())
