import sys

from wordspot.cli import main

sys.exit(main())
