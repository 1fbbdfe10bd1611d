#!/usr/bin/python3
"""Command-line entry of thermorph_post.sample (run as `python3 postproc/make_sample.py`, or installed as a console script).

The code is in thermorph_post/sample.py; this file keeps the documented command working from a checkout.
"""

import sys

from thermorph_post.sample import *  # noqa: F401,F403  (the module's functions, for `import make_sample`)
from thermorph_post.sample import main

if __name__ == "__main__":
    sys.exit(main())
