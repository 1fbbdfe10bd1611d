"""Command-line scripts of thermorph's post-processing (installed as thermorph_post.scripts).

The code is in the package thermorph_post/ beside these scripts; see README.md.
"""
