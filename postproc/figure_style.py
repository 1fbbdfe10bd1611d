"""Former name of thermorph_post.style, kept so that `import figure_style` from postproc/ keeps working."""

from thermorph_post.style import *  # noqa: F401,F403
