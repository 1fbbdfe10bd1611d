"""Former name of thermorph_post.budget, kept so that `import budget` from postproc/ keeps working."""

from thermorph_post.budget import *  # noqa: F401,F403
