#!/usr/bin/python3
"""Command-line entry of thermorph_post.sweep (run as `python3 postproc/sweep_figure.py`, or installed as a console script).

The code is in thermorph_post/sweep.py; this file keeps the documented command working from a checkout.
"""

import sys

from thermorph_post.sweep import *  # noqa: F401,F403  (the module's functions, for `import sweep_figure`)
from thermorph_post.sweep import main

if __name__ == "__main__":
    sys.exit(main())
