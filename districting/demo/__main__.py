"""``python -m districting.demo FOLDER``: write the demo project into FOLDER."""

import sys

from .files import main

sys.exit(main())
