#!/usr/bin/python3
"""Command-line entry of thermorph_post.export (run as `python3 postproc/export_csv.py`, or installed as a console script).

The code is in thermorph_post/export.py; this file keeps the documented command working from a checkout.
"""

import sys

from thermorph_post.export import *  # noqa: F401,F403  (the module's functions, for `import export_csv`)
from thermorph_post.export import main

if __name__ == "__main__":
    sys.exit(main())
