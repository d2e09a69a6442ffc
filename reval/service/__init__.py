"""The service layer: every action a user can take (`actions`), the data the app's screens show (`views`),
the one way to open a project (`project`) and the words both front-ends use (`wording`). The command line
(reval.cli) and the app (tui/) reach the core only through this package."""
from reval.errors import UserError

__all__ = ["UserError"]
