"""Expected profile figures for tests/data/penguins.csv, computed with pandas.

The dataset is the Palmer penguins data (CC0) as shipped in the PyPI package palmerpenguins
0.1.6 (palmerpenguins/data/penguins.csv, copied here unchanged). The figures are those of a
general-purpose reference library: pandas read_csv (its default "NA" handling), isna, nunique,
describe (whose quartiles are numpy's linear method, Hyndman-Fan type 7) and value_counts.

Run: python3 -m venv /tmp/venv && /tmp/venv/bin/pip install pandas==3.1.1
     /tmp/venv/bin/python tests/data/penguins_expected.py > tests/data/penguins_expected.json
"""

import json
import os

import pandas as pd

here = os.path.dirname(os.path.abspath(__file__))
df = pd.read_csv(os.path.join(here, "penguins.csv"))
out = {"_source": __doc__.strip().splitlines()[0], "pandas": pd.__version__, "rows": len(df), "columns": {}}
for name in df.columns:
    s = df[name]
    col = {
        "count": int(s.count()),
        "missing": int(s.isna().sum()),
        "distinct": int(s.nunique()),
    }
    if pd.api.types.is_numeric_dtype(s):
        d = s.describe()
        col.update({k: float(d[k]) for k in ["mean", "std", "min", "25%", "50%", "75%", "max"]})
    else:
        vc = s.value_counts()
        col["top"] = [[str(k), int(v)] for k, v in vc.items()]
    out["columns"][name] = col
print(json.dumps(out, indent=1))
