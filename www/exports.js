// Export buttons shared by the page's views: every figure as PNG (the canvas's pixels) and SVG
// (the same figure drawn again by the wasm module with plotters' SVG backend), every table as
// CSV (the cells exactly as shown) and JSON (the report object behind it). DOM only.

/** The stem of a file name ("corvin4-eccentric.tsv" → "corvin4-eccentric"). */
export function stem(name) {
  const base = String(name ?? "").split(/[\\/]/).pop() || "table";
  const dot = base.lastIndexOf(".");
  return dot > 0 ? base.slice(0, dot) : base;
}

/** Offer `blob` as a download named `fileName`. */
export function downloadBlob(blob, fileName) {
  const url = URL.createObjectURL(blob);
  const link = document.createElement("a");
  link.href = url;
  link.download = fileName;
  document.body.append(link);
  link.click();
  link.remove();
  setTimeout(() => URL.revokeObjectURL(url), 10_000);
}

/** Offer `text` as a download of MIME type `type`. */
export function downloadText(text, fileName, type) {
  downloadBlob(new Blob([text], { type }), fileName);
}

/** One CSV field, quoted only when it holds a comma, quote or line break (RFC 4180). */
function csvField(text) {
  return /[",\r\n]/.test(text) ? `"${text.replaceAll('"', '""')}"` : text;
}

/**
 * The rows of an HTML table as CSV, cell text exactly as shown; a cell spanning several
 * columns is followed by empty fields so every row has the header's width.
 */
export function tableCsv(table) {
  const lines = [];
  for (const row of table.rows) {
    const fields = [];
    for (const cell of row.cells) {
      fields.push(csvField(cell.textContent.trim()));
      for (let i = 1; i < cell.colSpan; i++) fields.push("");
    }
    lines.push(fields.join(","));
  }
  return `${lines.join("\r\n")}\r\n`;
}

function buttonRow(testId, ...buttons) {
  const row = document.createElement("div");
  row.className = "exports";
  row.dataset.testid = testId;
  const note = document.createElement("span");
  note.className = "export-error";
  note.setAttribute("role", "status");
  row.append(...buttons, note);
  return { row, note };
}

function button(label, testId, title) {
  const node = document.createElement("button");
  node.type = "button";
  node.textContent = label;
  node.title = title;
  node.dataset.testid = testId;
  return node;
}

// Run an export; a failure (nothing drawn yet, say) is shown beside the buttons.
function guarded(note, action) {
  return () => {
    note.textContent = "";
    try {
      action();
    } catch (err) {
      note.textContent = err instanceof Error ? err.message : String(err);
    }
  };
}

/**
 * Put "PNG" and "SVG" buttons under `canvas`. `fileStem()` names the files
 * (`<table>-<figure>`); `svg(width, height)` returns the SVG text of the figure drawn at the
 * canvas's size (a wasm `draw…Svg` method).
 */
export function addFigureExports(canvas, { fileStem, svg }) {
  const png = button("PNG", `export-png-${canvas.id}`, "Download this figure as a PNG image");
  const vector = button("SVG", `export-svg-${canvas.id}`, "Download this figure as an SVG drawing");
  const { row, note } = buttonRow(`exports-${canvas.id}`, png, vector);
  canvas.after(row);
  png.addEventListener("click", guarded(note, () => {
    const name = `${fileStem()}.png`;
    canvas.toBlob((blob) => {
      if (blob) downloadBlob(blob, name);
      else note.textContent = "the canvas could not be encoded as PNG";
    }, "image/png");
  }));
  vector.addEventListener("click", guarded(note, () => {
    const text = svg(canvas.width, canvas.height);
    downloadText(text, `${fileStem()}.svg`, "image/svg+xml");
  }));
}

/**
 * Put "CSV" and "JSON" buttons after `anchor` (the table itself, or the box it is redrawn in).
 * `table()` is the table shown now (default: `anchor`); the CSV holds its cells as shown, the
 * JSON is `json()` (the report object the table shows), pretty-printed. `fileStem()` names the
 * files; `name` names the buttons' test ids (default: `anchor.id`).
 */
export function addTableExports(anchor, { fileStem, json, table = () => anchor, name = anchor.id }) {
  const csv = button("CSV", `export-csv-${name}`, "Download this table as CSV");
  const object = button("JSON", `export-json-${name}`, "Download the numbers of this table as JSON");
  const { row, note } = buttonRow(`exports-${name}`, csv, object);
  anchor.after(row);
  csv.addEventListener("click", guarded(note, () => {
    const shown = table();
    if (!shown || shown.rows.length === 0) throw new Error("nothing to export yet");
    downloadText(tableCsv(shown), `${fileStem()}.csv`, "text/csv");
  }));
  object.addEventListener("click", guarded(note, () => {
    const value = json();
    if (value === null || value === undefined) throw new Error("nothing to export yet");
    const text = typeof value === "string" ? value : JSON.stringify(value, null, 2);
    downloadText(`${text}\n`, `${fileStem()}.json`, "application/json");
  }));
}
