"""reval's terminal app (Textual). UI only: it calls reval.service and holds no SQL or statistics."""
