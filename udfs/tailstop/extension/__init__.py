"""tailstop in LibreOffice Calc: the extension built from the formula specs, and LibreOffice as a calculator.

``build.py`` writes ``tailstop.oxt`` from ``tailstop.sheet.FORMULAS``
(``typelib.py`` the type library, ``calc_component.py`` the add-in LibreOffice
runs); ``libreoffice.py`` finds and runs LibreOffice's programs in throwaway
profiles; ``engine.py`` lets LibreOffice compute a book for ``tailstop recalc``.
This layer sits above ``workbooks`` and below ``commands``.
"""
