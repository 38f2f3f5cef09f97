"""Ask a running LibreOffice Calc what it makes of the tailstop add-in; print JSON.

Run with a Python that has LibreOffice's ``uno`` module (Debian: /usr/bin/python3
with python3-uno): ``python3 libreoffice_session.py SOFFICE BOOK SAVED_AS -env:...``.
It starts soffice headless on a private pipe with the given ``-env:`` arguments,
reads the functions its Function Wizard lists
(``com.sun.star.sheet.FunctionDescriptions``), opens BOOK, recalculates it,
saves it as .xlsx to SAVED_AS, and stops soffice again.
"""
import json
import os
import signal
import subprocess
import sys
import time
import uuid

import uno
from com.sun.star.beans import PropertyValue

soffice, book, saved_as, *environment = sys.argv[1:]
pipe = f"tailstop{uuid.uuid4().hex}"
office = subprocess.Popen([soffice, *environment, "--headless", "--invisible", "--norestore", "--nolockcheck",
                           f"--accept=pipe,name={pipe};urp;"], stdin=subprocess.DEVNULL,
                          stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
try:
    local = uno.getComponentContext()
    resolver = local.ServiceManager.createInstanceWithContext("com.sun.star.bridge.UnoUrlResolver", local)
    deadline = time.monotonic() + 120
    while True:
        try:
            context = resolver.resolve(f"uno:pipe,name={pipe};urp;StarOffice.ComponentContext")
            break
        except Exception:
            if time.monotonic() > deadline or office.poll() is not None:
                raise
            time.sleep(0.3)
    descriptions = context.ServiceManager.createInstanceWithContext("com.sun.star.sheet.FunctionDescriptions", context)
    functions = {}
    for index in range(descriptions.getCount()):
        entry = {item.Name: item.Value for item in descriptions.getByIndex(index)}
        functions[entry["Name"]] = {
            "category": entry["Category"],
            "description": entry["Description"],
            "arguments": [[argument.Name, argument.Description, argument.IsOptional] for argument in entry["Arguments"] or ()],
        }
    desktop = context.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop", context)
    document = desktop.loadComponentFromURL(uno.systemPathToFileUrl(book), "_blank", 0,
                                            (PropertyValue(Name="Hidden", Value=True),))
    document.calculateAll()
    document.storeToURL(uno.systemPathToFileUrl(saved_as),
                        (PropertyValue(Name="FilterName", Value="Calc MS Excel 2007 XML"),))
    document.close(True)
    print(json.dumps(functions))
    try:
        desktop.terminate()
    except Exception:  # the bridge closes while soffice quits
        pass
    office.wait(timeout=60)
finally:
    # soffice may have started soffice.bin beside itself: end the whole group, whatever happened above
    try:
        os.killpg(office.pid, signal.SIGKILL)
    except ProcessLookupError:
        pass
    office.wait()
