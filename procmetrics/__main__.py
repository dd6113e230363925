import sys

from procmetrics.cli import main

sys.exit(main())
