import sys

from workspace.cli import main

sys.exit(main())
