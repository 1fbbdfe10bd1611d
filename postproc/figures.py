#!/usr/bin/python3
"""Command-line entry of thermorph_post.figures (run as `python3 postproc/figures.py`, or installed as a console script).

The code is in thermorph_post/figures.py; this file keeps the documented command working from a checkout.
"""

import sys

from thermorph_post.figures import *  # noqa: F401,F403  (the module's functions, for `import figures`)
from thermorph_post.figures import main

if __name__ == "__main__":
    sys.exit(main())
