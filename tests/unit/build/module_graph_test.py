#!/usr/bin/python3
"""module_graph_test: scripts/check-modules accepts this tree and refuses each
kind of breach of the module graph (DEVELOPERS.md, "Module graph").

Each breach is made in a scratch copy of common/, server/, worker/ and cli/;
the checker must exit 1 and name the file and the rule."""

import os
import shutil
import subprocess
import sys
import tempfile
import unittest

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.dirname(
    os.path.abspath(__file__)))))
CHECKER = os.path.join(ROOT, "scripts", "check-modules")


def run(root):
    return subprocess.run([sys.executable, CHECKER, root], capture_output=True,
                          text=True, timeout=120)


class ModuleGraphTest(unittest.TestCase):
    def setUp(self):
        self.tmp = tempfile.mkdtemp(prefix="module-graph-")
        for folder in ("common", "server", "worker", "cli"):
            shutil.copytree(os.path.join(ROOT, folder),
                            os.path.join(self.tmp, folder))

    def tearDown(self):
        shutil.rmtree(self.tmp)

    def edit(self, path, old, new):
        full = os.path.join(self.tmp, path)
        with open(full, encoding="utf-8") as f:
            text = f.read()
        self.assertIn(old, text, path)
        with open(full, "w", encoding="utf-8") as f:
            f.write(text.replace(old, new, 1))

    def assertRefused(self, *fragments):
        result = run(self.tmp)
        self.assertEqual(result.returncode, 1, result.stdout + result.stderr)
        for fragment in fragments:
            self.assertIn(fragment, result.stderr)

    def test_the_tree_as_it_is_holds(self):
        result = run(ROOT)
        self.assertEqual(result.returncode, 0, result.stderr)
        self.assertIn("the module graph holds", result.stdout)

    def test_client_including_the_store_is_refused(self):
        self.edit("cli/format.cc", '#include "cli/format.h"',
                  '#include "cli/format.h"\n#include "server/store/store.h"')
        self.assertRefused("cli/format.cc:", "module cli may not include",
                           "server/store/store.h")

    def test_client_including_the_worker_is_refused(self):
        self.edit("cli/args.cc", '#include "cli/args.h"',
                  '#include "cli/args.h"\n#include "worker/worker.h"')
        self.assertRefused("cli/args.cc:", "(module worker)")

    def test_breeder_including_the_store_is_refused(self):
        self.edit("server/engine/breeder.h", '#include "server/store/records.h"',
                  '#include "server/store/store.h"')
        self.assertRefused("server/engine/breeder.h:",
                           "module operators may not include")

    def test_operators_including_sqlite_is_refused(self):
        self.edit("server/engine/operators.h", "#include <vector>",
                  "#include <vector>\n#include <sqlite3.h>")
        self.assertRefused("server/engine/operators.h:", "<sqlite3.h>",
                           "only ['store'] may")

    def test_file_built_into_another_modules_library_is_refused(self):
        with open(os.path.join(self.tmp, "server/store/extra.cc"), "w") as f:
            f.write('#include "server/store/store.h"\n')
        self.edit("server/engine/CMakeLists.txt", "  engine.cc\n",
                  "  engine.cc\n  ../store/extra.cc\n")
        self.assertRefused("extra.cc is built into skerry_engine",
                           "library skerry_store")

    def test_unlisted_source_file_is_refused(self):
        with open(os.path.join(self.tmp, "server/api/orphan.cc"), "w") as f:
            f.write("\n")
        self.assertRefused("server/api/orphan.cc: not listed")


if __name__ == "__main__":
    unittest.main()
