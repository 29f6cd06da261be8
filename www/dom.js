// eccaudit page: the DOM helpers every view shares, one home each — `$`, `el` (nodes built from
// text only: user strings never become HTML), the error boxes, `messageOf` and `tick`. DOM only;
// no number is computed here.

/** The element with id `id`. */
export const $ = (id) => document.getElementById(id);

/**
 * A DOM node `tag` with attributes `attrs` (`class` sets the class name) and children; a child
 * that is not a Node becomes a text node, so user text is never parsed as HTML.
 */
export function el(tag, attrs = {}, ...children) {
  const node = document.createElement(tag);
  for (const [key, value] of Object.entries(attrs)) {
    if (key === "class") node.className = value;
    else node.setAttribute(key, value);
  }
  for (const child of children) {
    node.append(child instanceof Node ? child : document.createTextNode(String(child)));
  }
  return node;
}

/** Show `message` in the error box `box` (an element or its id); an empty message hides it. */
export function showError(box, message) {
  const node = typeof box === "string" ? $(box) : box;
  node.textContent = message;
  node.hidden = !message;
}

/** Hide the error box `box` (an element or its id) and clear its text. */
export function hideError(box) {
  showError(box, "");
}

/** The message of a thrown value (an `Error`'s message, anything else as text). */
export const messageOf = (err) => (err instanceof Error ? err.message : String(err));

/**
 * Make `zone` a drop target for files: highlighted (class `dragging`) while files are dragged
 * over it; `onFiles(fileList)` gets the dropped files; Enter or Space on it opens the file
 * chooser `input`.
 */
export function wireDropZone(zone, input, onFiles) {
  zone.addEventListener("keydown", (ev) => {
    if (ev.key === "Enter" || ev.key === " ") { ev.preventDefault(); input.click(); }
  });
  for (const name of ["dragenter", "dragover"]) {
    zone.addEventListener(name, (ev) => { ev.preventDefault(); zone.classList.add("dragging"); });
  }
  for (const name of ["dragleave", "drop"]) {
    zone.addEventListener(name, () => zone.classList.remove("dragging"));
  }
  zone.addEventListener("drop", (ev) => {
    ev.preventDefault();
    onFiles(ev.dataTransfer.files);
  });
}

/** A promise that resolves in a task of its own, so the page can repaint before long work. */
export const tick = () => new Promise((resolve) => setTimeout(resolve, 0));
