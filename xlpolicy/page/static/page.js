// The owner's page: send a workbook, follow its run, show what to order.
// Every text from the workbook is set with textContent, never as HTML.
"use strict";

(function () {
  const $ = (id) => document.getElementById(id);
  const CHOICES = ["service_measure", "service_target", "holding_rate", "order_cost"];
  let about = { pdf: false, idle_minutes: 30, max_upload: 0, max_upload_text: "" };
  let current = null; // the job shown now
  let fileName = "";

  function show(which) {
    for (const id of ["working", "failed", "result"]) $(id).hidden = id !== which;
  }

  function choices() {
    const out = {};
    for (const k of CHOICES) {
      const v = $(k).value.trim();
      if (v) out[k] = v;
    }
    return out;
  }

  async function send(file) {
    fileName = file.name;
    $("working-file").textContent = file.name;
    $("stage").textContent = "Sending";
    $("bar").removeAttribute("value");
    show("working");
    if (about.max_upload && file.size > about.max_upload) {
      fail({ title: "This file is too large", message: file.name + " is larger than the " +
        about.max_upload_text + " this page takes. If you trust it, start the page with " +
        "'xlpolicy open --allow-large'." });
      return;
    }
    const params = new URLSearchParams(choices());
    if (current) params.set("replaces", current);
    let answer;
    try {
      const r = await fetch("/api/jobs?" + params.toString(), {
        method: "POST", body: file, credentials: "same-origin",
        headers: { "X-File-Name": encodeURIComponent(file.name) },
      });
      answer = await r.json();
    } catch (e) {
      fail({ title: "The page lost touch with xlpolicy",
             message: "Is the command that opened this page still running? Start it again." });
      return;
    }
    follow(answer);
  }

  async function rerun() {
    if (!current) return;
    show("working");
    $("stage").textContent = "Starting";
    let answer;
    try {
      const r = await fetch("/api/jobs/" + current + "/run", {
        method: "POST", credentials: "same-origin",
        headers: { "Content-Type": "application/json" }, body: JSON.stringify(choices()),
      });
      answer = await r.json();
    } catch (e) {
      fail({ title: "The page lost touch with xlpolicy",
             message: "Is the command that opened this page still running? Start it again." });
      return;
    }
    follow(answer);
  }

  async function follow(status) {
    while (status && (status.state === "waiting" || status.state === "running")) {
      if (status.job) current = status.job;
      $("stage").textContent = status.stage || "Working";
      if (status.total) {
        $("bar").max = status.total;
        $("bar").value = Math.min(status.done, status.total);
      } else {
        $("bar").removeAttribute("value");
      }
      await new Promise((ok) => setTimeout(ok, 100));
      try {
        const r = await fetch("/api/jobs/" + current, { credentials: "same-origin" });
        status = await r.json();
      } catch (e) {
        status = { state: "failed", failure: { title: "The page lost touch with xlpolicy",
          message: "Is the command that opened this page still running? Start it again." } };
      }
    }
    if (status.job) current = status.job;
    if (status.state === "done") {
      result(status.result);
    } else {
      fail(status.failure || { title: "Something went wrong", message: "" });
    }
  }

  function fail(f) {
    $("failed-title").textContent = f.title || "Cannot use this workbook";
    $("failed-message").textContent = f.message || "";
    const table = $("failed-problems");
    const body = table.tBodies[0];
    body.replaceChildren();
    const list = (f.problems && f.problems.list) || [];
    table.hidden = list.length === 0;
    for (const p of list) body.append(problemRow(p));
    show("failed");
    $("rerun").disabled = !current;
  }

  function cell(tag, text, cls) {
    const c = document.createElement(tag);
    c.textContent = text == null ? "" : String(text);
    if (cls) c.className = cls;
    return c;
  }

  function problemRow(p) {
    const tr = document.createElement("tr");
    tr.className = p.severity;
    tr.append(cell("td", p.severity), cell("td", p.where), cell("td", p.item),
              cell("td", p.message));
    return tr;
  }

  function plural(n, one, many) { return n + " " + (n === 1 ? one : many); }

  function result(r) {
    $("result-title").textContent = "Plan for " + r.file;
    $("result-read").textContent = "Read " + plural(r.items_read, "item", "items") +
      "; planned " + r.items_planned + ", skipped " + r.items_skipped + ".";
    const h = r.headline;
    $("h-order-figure").textContent = plural(h.items_to_order, "item", "items");
    $("h-order-note").textContent = h.items_to_order ? "worth " + h.order_value_text :
      "nothing is at or below its reorder point";
    $("h-cost-figure").textContent = h.yearly_cost_text;
    if (h.items_compared) {
      $("h-saving-figure").textContent = h.saving_text + " a year";
      $("h-saving-note").textContent = "on " + plural(h.items_compared, "item", "items") +
        " whose order quantity and reorder point today are in the workbook (today: " +
        h.today_cost_text + ")";
    } else {
      $("h-saving-figure").textContent = "Not known";
      $("h-saving-note").textContent = "add today's order quantity and reorder point to " +
        "Items to see it";
    }
    $("caution").textContent = r.caution;

    // downloads
    const base = "/api/jobs/" + current;
    $("get-workbook").href = base + "/workbook";
    $("get-workbook").textContent = "Download the policy workbook (" + r.output_name + ")";
    $("get-csv").href = base + "/csv";
    $("get-pdf").href = base + "/pdf";
    $("get-pdf").hidden = !about.pdf;
    $("download-note").textContent = (about.pdf ? "Take the printable list first: " : "") +
      "downloading the policy workbook also removes your file from this computer's " +
      "temporary folder.";

    // reorder list, one body per supplier
    const table = $("reorder");
    for (const b of Array.from(table.tBodies)) b.remove();
    const head = table.tHead.rows[0];
    head.replaceChildren();
    const cols = r.reorder.columns;
    cols.forEach((c, i) => head.append(cell("th", c, i >= 2 ? "num" : "")));
    for (const g of r.reorder.groups) {
      const body = table.createTBody();
      const tr = body.insertRow();
      const th = cell("th", g.supplier);
      th.colSpan = cols.length;
      th.scope = "rowgroup";
      th.append(cell("span", "total " + g.total_text, "total"));
      tr.append(th);
      for (const row of g.rows) {
        const line = body.insertRow();
        row.cells.forEach((v, i) => line.append(cell("td", v, i >= 2 ? "num" : "")));
      }
    }
    table.hidden = r.reorder.groups.length === 0;
    $("reorder-empty").hidden = r.reorder.groups.length !== 0;
    $("reorder-note").textContent = r.reorder.note || "";
    $("reorder-note").hidden = !r.reorder.note;
    $("reorder-more").hidden = !r.reorder.left_out;
    $("reorder-more").textContent = "… and " + r.reorder.left_out +
      " more lines: see the reorder sheet of the policy workbook.";

    // problems, with the console's words
    const pc = r.problems.counts;
    const parts = ["fatal", "error", "warning", "info"].filter((s) => pc[s])
      .map((s) => plural(pc[s], s, s + "s"));
    $("problems-title").textContent = "Problems found" + (parts.length ? ": " + parts.join(", ") : "");
    const pbody = $("problems").tBodies[0];
    pbody.replaceChildren();
    for (const p of r.problems.list) pbody.append(problemRow(p));
    $("problems").hidden = r.problems.list.length === 0;
    $("problems-none").hidden = r.problems.list.length !== 0;
    $("problems-more").hidden = !r.problems.left_out;
    $("problems-more").textContent = "… and " + r.problems.left_out +
      " more: see the Warnings sheet of the policy workbook.";

    // the choices as used
    for (const k of CHOICES) {
      const c = r.choices[k];
      const v = c.value == null ? "each item's own value" : String(formatChoice(k, c.value));
      $(k + "-used").textContent = "used: " + v + (c.source ? " (" + c.source + ")" : "");
    }
    $("rerun").disabled = false;
    show("result");
    document.body.dataset.runSeconds = String(r.run_seconds);
    document.body.dataset.state = "done";
  }

  function formatChoice(key, v) {
    if (typeof v === "number" && (key === "service_target" || key === "holding_rate")) {
      return (Math.round(v * 10000) / 100) + "%";
    }
    return v;
  }

  function downloadedWorkbook() {
    $("download-note").textContent = "Your file was removed from this computer's temporary " +
      "folder. Drop it again to run it with other choices.";
    $("get-pdf").hidden = true;
    $("rerun").disabled = true;
  }

  async function start() {
    try {
      const r = await fetch("/api/about", { credentials: "same-origin" });
      about = await r.json();
      $("limits").textContent = "Excel (.xlsx, .xlsm, .xls), OpenDocument (.ods) or CSV, up to " +
        about.max_upload_text + ".";
      $("privacy").textContent = "Your upload is kept in a private temporary folder on this " +
        "computer. It is removed when you download the policy workbook, after " +
        about.idle_minutes + " minutes unused, and when you stop the command that opened " +
        "this page.";
    } catch (e) { /* the defaults above stand */ }

    const drop = $("drop");
    $("choose").addEventListener("click", () => $("picker").click());
    $("picker").addEventListener("change", () => {
      const f = $("picker").files[0];
      if (f) send(f);
      $("picker").value = "";
    });
    drop.addEventListener("dragover", (e) => { e.preventDefault(); drop.classList.add("over"); });
    drop.addEventListener("dragleave", () => drop.classList.remove("over"));
    drop.addEventListener("drop", (e) => {
      e.preventDefault();
      drop.classList.remove("over");
      const f = e.dataTransfer && e.dataTransfer.files[0];
      if (f) send(f);
    });
    // a file dropped anywhere else on the page must not make the browser open it
    window.addEventListener("dragover", (e) => e.preventDefault());
    window.addEventListener("drop", (e) => e.preventDefault());
    $("rerun").addEventListener("click", rerun);
    $("get-workbook").addEventListener("click", () => setTimeout(downloadedWorkbook, 500));
    window.addEventListener("pagehide", () => {
      if (current) fetch("/api/jobs/" + current, { method: "DELETE", keepalive: true });
    });
    document.body.dataset.state = "ready";
  }

  start();
})();
