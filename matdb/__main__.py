import sys

from matdb.cli import main

sys.exit(main())
