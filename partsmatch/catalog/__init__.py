"""The shop's catalog: parts, stock, cross-references, saved circuits and the repair log."""
