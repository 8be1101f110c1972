"""The audit framework, apart from the analyses: the check registry and contract
(:mod:`.registry`), the runner (:mod:`.runner`), the settings from files and the command
line (:mod:`.settings`) and the structured result (:mod:`.result`). The public names are
re-exported by :mod:`massarc.validators`."""

__all__: list[str] = []
