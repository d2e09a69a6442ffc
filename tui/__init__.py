"""reval's terminal app (Textual). UI only: it calls reval.commands and holds no SQL or statistics."""
