"""``python -m codebench``: the same as the ``codebench`` command."""

from codebench.launch import entry

# Worker processes import the parent's main module under another name: only run as a program.
if __name__ == "__main__":
    entry()
