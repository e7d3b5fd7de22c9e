// Upload page: drag-and-drop of files and whole folders, plus the two pickers.
// Files are sent as multipart "files" entries whose filename carries the relative path,
// so the server can take the class from the folder (the part before the first "/").
(function () {
  "use strict";
  const form = document.getElementById("upload-form");
  if (!form) return;
  const zone = document.getElementById("dropzone");
  const picked = document.getElementById("picked");
  const status = document.getElementById("upload-status");
  const folderInput = document.getElementById("folder-input");
  const fileInput = document.getElementById("file-input");
  let chosen = []; // [{file, path}]

  function show() {
    if (!chosen.length) { picked.textContent = "Nothing chosen yet."; return; }
    const classes = new Set(chosen.map(c => c.path.includes("/") ? c.path.split("/")[0] : "unclassified"));
    picked.textContent = chosen.length + " file" + (chosen.length === 1 ? "" : "s") + " in " +
      classes.size + " class" + (classes.size === 1 ? "" : "es") + ": " + Array.from(classes).join(", ");
  }

  // A picked or dropped folder "shop/" holding "shop/product/a.jpg": the classes are the sub-folders,
  // so drop the shared top folder when every file sits below it.
  function stripSharedRoot(items) {
    if (!items.length) return items;
    const first = items[0].path.split("/");
    if (first.length < 3) return items;
    const root = first[0] + "/";
    if (!items.every(it => it.path.startsWith(root) && it.path.split("/").length >= 3)) return items;
    return items.map(it => ({ file: it.file, path: it.path.slice(root.length) }));
  }

  function addFiles(list, usePaths) {
    const items = Array.from(list).map(f => ({ file: f, path: (usePaths && f.webkitRelativePath) || f.name }));
    chosen = chosen.concat(usePaths ? stripSharedRoot(items) : items);
    show();
  }

  folderInput.addEventListener("change", () => addFiles(folderInput.files, true));
  fileInput.addEventListener("change", () => addFiles(fileInput.files, false));

  function readEntries(reader) {
    return new Promise((resolve, reject) => reader.readEntries(resolve, reject));
  }
  async function walk(entry, prefix, out) {
    if (entry.isFile) {
      const file = await new Promise((resolve, reject) => entry.file(resolve, reject));
      out.push({ file: file, path: prefix + file.name });
    } else if (entry.isDirectory) {
      const reader = entry.createReader();
      let batch;
      do { // readEntries returns at most ~100 entries per call
        batch = await readEntries(reader);
        for (const child of batch) await walk(child, prefix + entry.name + "/", out);
      } while (batch.length);
    }
  }

  ["dragenter", "dragover"].forEach(t => zone.addEventListener(t, e => { e.preventDefault(); zone.classList.add("over"); }));
  ["dragleave", "drop"].forEach(t => zone.addEventListener(t, () => zone.classList.remove("over")));
  zone.addEventListener("drop", async e => {
    e.preventDefault();
    const entries = Array.from(e.dataTransfer.items || []).map(i => i.webkitGetAsEntry && i.webkitGetAsEntry()).filter(Boolean);
    if (!entries.length) { addFiles(e.dataTransfer.files, false); return; }
    const out = [];
    for (const entry of entries) await walk(entry, "", out);
    const dirs = entries.filter(en => en.isDirectory).length;
    chosen = chosen.concat(dirs === 1 && entries.length === 1 ? stripSharedRoot(out) : out);
    show();
  });

  form.addEventListener("submit", async e => {
    if (!chosen.length) return; // let the plain form post (and the server's message) happen
    e.preventDefault();
    const data = new FormData();
    chosen.forEach(c => data.append("files", c.file, c.path));
    document.getElementById("upload-button").disabled = true;
    status.textContent = "Uploading and checking " + chosen.length + " files…";
    try {
      const token = form.querySelector('input[name="csrf_token"]');
      const resp = await fetch(form.action, { method: "POST", body: data,
                                              headers: token ? { "X-CSRFToken": token.value } : {} });
      if (resp.redirected) { window.location.assign(resp.url); return; }
      document.open(); document.write(await resp.text()); document.close();
    } catch (err) {
      status.textContent = "Upload failed: " + err;
      document.getElementById("upload-button").disabled = false;
    }
  });
})();
