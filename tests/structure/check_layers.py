#!/usr/bin/env python3
"""Every source and header includes only its own layer and the layers below it,
as listed in the top-level CMakeLists.txt (ALLOYSPEC_LAYER_DEPS_<layer>), and
deal.II stays out of the headers of the layers that must not need it.
Usage: check_layers.py SOURCE_ROOT
"""
import os
import re
import sys

root = sys.argv[1]
cmake = open(os.path.join(root, "CMakeLists.txt")).read()
layers = re.search(r"set\(ALLOYSPEC_LAYERS ([^)]*)\)", cmake).group(1).split()
allowed = {}
for layer in layers:
    deps = re.search(rf"set\(ALLOYSPEC_LAYER_DEPS_{layer}\b([^)]*)\)", cmake).group(1).split()
    allowed[layer] = set(deps) | {layer}
# Headers of these layers are included by code that must build without deal.II;
# they may forward-declare dealii::ParameterHandler but not include deal.II.
no_dealii_headers = {"core", "model", "io", "analysis"}

include = re.compile(r'#\s*include\s*[<"]alloyspec/(\w+)/')
dealii = re.compile(r"#\s*include\s*<deal\.II/")
failures, files = [], 0
for kind, base in (("src", os.path.join(root, "src")),
                   ("include", os.path.join(root, "include", "alloyspec"))):
    for layer in layers:
        folder = os.path.join(base, layer)
        if not os.path.isdir(folder):
            continue
        for name in sorted(os.listdir(folder)):
            path = os.path.join(folder, name)
            files += 1
            text = open(path, encoding="utf-8").read()
            for used in include.findall(text):
                if used not in allowed[layer]:
                    failures.append(f"{kind}/{layer}/{name} includes alloyspec/{used}/ "
                                    f"(allowed: {', '.join(sorted(allowed[layer]))})")
            if kind == "include" and layer in no_dealii_headers and dealii.search(text):
                failures.append(f"include/alloyspec/{layer}/{name} includes deal.II")
for line in failures:
    print("LAYER:", line)
print(f"{files} files checked against the layers {' -> '.join(layers)}; {len(failures)} violations")
sys.exit(1 if failures else 0)
