"""The ratio-study report (HTML and PDF) and the document writer other reports share."""
