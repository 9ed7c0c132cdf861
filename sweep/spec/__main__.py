"""``python -m sweep.spec --markdown``: print the generated spec reference (README's)."""

import sys

from .doc import markdown_reference

if __name__ == "__main__":
    if "--markdown" in sys.argv:
        print(markdown_reference())
    else:
        print("usage: python -m sweep.spec --markdown")
