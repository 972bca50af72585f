import sys

from streamsim.cli import main

sys.exit(main())
