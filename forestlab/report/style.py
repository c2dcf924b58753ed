"""The report's style sheet: the house colours of forestlab's pictures, a contents column, a print sheet."""

STYLE = """
:root { --ink: #22313f; --teal: #2a7f8e; --sand: #d9892b; --muted: #5f6b76; --rule: #d8dde2;
        --paper: #fbfaf7; --shade: #f1efe9; }
* { box-sizing: border-box; }
body { margin: 0; background: var(--paper); color: var(--ink); line-height: 1.45;
       font: 15px/1.45 "DejaVu Sans", "Liberation Sans", Arial, sans-serif;
       display: grid; grid-template-columns: 15rem minmax(0, 1fr); grid-template-areas: "head head" "nav main"; }
header { grid-area: head; padding: 1.4rem 2rem 1.2rem; border-bottom: 6px solid var(--teal);
         background: var(--ink); color: #fff; }
header h1 { margin: 0.1rem 0 0.3rem; font-size: 1.7rem; font-weight: 600; }
header p { margin: 0; color: #d6dde3; }
header .kicker { text-transform: uppercase; letter-spacing: 0.12em; font-size: 0.75rem; color: #9fd0d8; }
nav { grid-area: nav; padding: 1.5rem 1rem 1.5rem 2rem; }
nav > div { position: sticky; top: 1rem; }
nav h2 { font-size: 0.8rem; text-transform: uppercase; letter-spacing: 0.1em; color: var(--muted); margin: 0 0 0.5rem; }
nav ol { margin: 0; padding-left: 1.2rem; color: var(--muted); }
nav li { margin: 0.25rem 0; }
nav a { color: var(--ink); text-decoration: none; border-bottom: 1px solid var(--rule); }
main { grid-area: main; padding: 1rem 2rem 3rem 1rem; max-width: 62rem; }
section { margin: 0 0 2.2rem; }
h2 { font-size: 1.2rem; margin: 1.2rem 0 0.6rem; padding-left: 0.6rem; border-left: 4px solid var(--sand); }
p.lead { margin: 0.2rem 0 0.8rem; color: var(--muted); }
table { border-collapse: collapse; margin: 0.4rem 0 1rem; min-width: 22rem; font-size: 0.92rem; }
caption { text-align: left; color: var(--muted); padding: 0 0 0.3rem; font-size: 0.85rem; }
th, td { padding: 0.28rem 0.7rem; border-bottom: 1px solid var(--rule); text-align: left; vertical-align: top; }
thead th { border-bottom: 2px solid var(--ink); font-weight: 600; }
tbody tr:nth-child(even) { background: var(--shade); }
tbody th { font-weight: 600; }
td .n, th .n { font-variant-numeric: tabular-nums; }
td:has(> .n) { text-align: right; }
table.facts td:has(> .n) { text-align: left; }
dl.tiles { display: flex; flex-wrap: wrap; gap: 0.8rem; margin: 0.5rem 0 1rem; }
.tile { border: 1px solid var(--rule); border-top: 3px solid var(--teal); background: #fff; padding: 0.5rem 0.9rem;
        min-width: 9rem; }
.tile dt { font-size: 0.78rem; color: var(--muted); }
.tile dd { margin: 0.1rem 0 0; font-size: 1.35rem; font-weight: 600; }
.tile dd.note { font-size: 0.75rem; font-weight: 400; color: var(--muted); }
figure { margin: 0.6rem 0 1.4rem; background: #fff; border: 1px solid var(--rule); padding: 0.6rem; max-width: 44rem; }
figure img { display: block; width: 100%; height: auto; }
figcaption { font-size: 0.85rem; color: var(--muted); margin-top: 0.4rem; }
.pictures { display: flex; flex-wrap: wrap; gap: 0 1rem; }
.pictures figure { flex: 0 1 calc(50% - 0.5rem); min-width: 18rem; }
.caution { border-left: 4px solid var(--sand); background: #fff; padding: 0.6rem 1rem; }
code { font-size: 0.88em; background: var(--shade); padding: 0 0.2em; }
@media (max-width: 50rem) { body { display: block; } nav { padding: 1rem 1.5rem 0; } main { padding: 0 1.5rem 2rem; } }
@media print {
  @page { size: A4; margin: 16mm 14mm; }
  body { display: block; background: #fff; font-size: 10pt; }
  header { background: none; color: var(--ink); border-bottom: 2px solid var(--ink); padding: 0 0 0.4rem; }
  header p, header .kicker { color: var(--muted); }
  nav { display: none; }
  main { padding: 0; max-width: none; }
  section { break-inside: auto; }
  h2 { break-after: avoid; }
  table, figure, .tiles, .caution { break-inside: avoid; }
  figure { border: none; padding: 0; max-width: 15cm; }
  tbody tr:nth-child(even) { background: none; }
  a { color: inherit; border: none; }
}
"""
