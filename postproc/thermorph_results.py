"""Former name of thermorph_post.results, kept so that `import thermorph_results` from postproc/ keeps working."""

from thermorph_post.results import *  # noqa: F401,F403
