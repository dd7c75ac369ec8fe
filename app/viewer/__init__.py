"""The desktop viewer: Qt-free models (``playback``, ``flags``, ``report_md``) that widgets listen
and write to, and the Qt widgets (``window``, ``panels``, ``timeline``, background ``worker``).
Only this package imports Qt."""
