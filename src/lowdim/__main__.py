import sys

from lowdim.cli import main

sys.exit(main())
