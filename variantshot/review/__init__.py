"""Review stage: QA metrics and verdicts, approvals bound to image content, contact sheets."""
