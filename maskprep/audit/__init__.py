"""Stage 4, the audit: how a vocabulary fragments a corpus's words, as a table, JSON and a page.

It measures tokenizers (given or trained at several sizes); it does not change them.
"""

from .measure import AuditConfig, run_audit

__all__ = ["AuditConfig", "run_audit"]
