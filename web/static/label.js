// Concord labelling screen. Plain script, no framework: it keeps two
// claimed items with their images loaded, so after a vote the next image is
// already there; each vote carries a UUID made here, so a retry after a lost
// answer is stored once.
(function () {
  "use strict";
  var data = JSON.parse(document.getElementById("label-data").textContent);
  var api = "/api/p/" + encodeURIComponent(data.project);
  var $ = function (id) { return document.getElementById(id); };
  var img = $("lab-image"), choicesEl = $("lab-choices"), pathEl = $("lab-path"),
    hintEl = $("lab-hint"), statusEl = $("lab-status"), search = $("lab-search");

  // ---- the label tree ----
  var byId = {}, kids = { root: [] };
  data.labels.forEach(function (l) {
    byId[l.id] = l;
    kids[l.id] = [];
  });
  data.labels.forEach(function (l) {
    kids[l.parent == null ? "root" : l.parent].push(l);
  });
  var leaves = data.labels.filter(function (l) { return l.leaf; });
  function pathOf(l) {
    var names = [];
    for (var n = l; n; n = n.parent == null ? null : byId[n.parent]) names.unshift(n.name);
    return names.join(" › ");
  }

  // A level shows at most nine choices; a longer list is cut into groups
  // of consecutive labels, each group a choice of its own.
  function fit(list) {
    if (list.length <= 9) return list;
    var size = Math.ceil(list.length / 9), out = [];
    for (var i = 0; i < list.length; i += size) {
      var part = list.slice(i, i + size);
      out.push({ group: fit(part), name: part[0].name + " … " + part[part.length - 1].name });
    }
    return fit(out);
  }

  // stack holds the levels walked into: {node (a label or null), list}.
  var stack = [];
  function top() { return stack[stack.length - 1]; }
  function rootLevel() {
    return { node: null, list: fit(leaves.length <= 9 ? leaves : kids.root), title: "All labels" };
  }
  function enter(choice) {
    if (choice.group) {
      stack.push({ node: top().node, list: choice.group, title: choice.name });
    } else {
      stack.push({ node: choice, list: fit(kids[choice.id]), title: pathOf(choice) });
    }
    draw();
  }
  function up() {
    if (search.value) { search.value = ""; draw(); return; }
    if (stack.length > 1) { stack.pop(); draw(); }
  }
  function reset() { search.value = ""; stack = [rootLevel()]; draw(); }

  function matches() {
    var q = search.value.trim().toLowerCase();
    return data.labels.filter(function (l) {
      return l.name.toLowerCase().indexOf(q) >= 0 || l.key.indexOf(q) >= 0 ||
        l.description.toLowerCase().indexOf(q) >= 0;
    }).slice(0, 9);
  }
  function current() { return search.value.trim() ? matches() : top().list; }

  function draw() {
    var list = current();
    choicesEl.textContent = "";
    list.forEach(function (c, i) {
      var li = document.createElement("li"), b = document.createElement("button");
      b.type = "button";
      b.className = "lab-choice" + (c.group || (c.id && !c.leaf && !search.value) ? " lab-group" : "");
      var k = document.createElement("kbd");
      k.textContent = String(i + 1);
      var name = document.createElement("span");
      name.className = "lab-name";
      name.textContent = search.value.trim() ? pathOf(c) : c.name;
      b.appendChild(k);
      b.appendChild(name);
      if (c.description) {
        b.title = c.description;
        var d = document.createElement("span");
        d.className = "lab-desc";
        d.textContent = c.description;
        b.appendChild(d);
      }
      b.addEventListener("click", function () { pick(c); });
      b.addEventListener("focus", function () { hint(c); });
      b.addEventListener("mouseenter", function () { hint(c); });
      li.appendChild(b);
      choicesEl.appendChild(li);
    });
    var t = top();
    pathEl.textContent = search.value.trim() ? "Search results" : t.title;
    hintEl.textContent = t.node && !search.value.trim() ? "Enter: vote “" + t.node.name + "” if unsure of the detail. Escape: back." : "";
  }
  function hint(c) {
    if (c.description) hintEl.textContent = c.name + ": " + c.description;
  }
  function pick(c) {
    if (c.group || (!search.value.trim() && !c.leaf && kids[c.id].length)) { enter(c); return; }
    vote(c.key);
  }

  // ---- items: a queue of claimed items, the first one on screen ----
  // done lists the latest items voted on or skipped here: an answer to a
  // request sent before that happened may still offer them, and they must
  // not return. Each request sends them, so the server passes over them
  // too; a skipped item may come back once it has left the list.
  var queue = [], shownAt = 0, done = [], busy = false, stale = 0;
  function held() {
    return queue.map(function (it) { return it.id; }).concat(done);
  }
  function dealt(id) { done.push(id); if (done.length > 40) done.shift(); }
  function dealtWith(id) { return done.indexOf(id) >= 0; }
  function preload(it) { var i = new Image(); i.src = it.image; it.pre = i; }
  function show() {
    var it = queue[0];
    if (!it) {
      img.hidden = true;
      $("lab-empty").hidden = false;
      return;
    }
    $("lab-empty").hidden = true;
    img.hidden = false;
    img.src = it.image;
    img.width = it.width;
    img.height = it.height;
    shownAt = performance.now();
    reset();
  }
  function add(it) {
    if (!it || dealtWith(it.id) || queue.some(function (q) { return q.id === it.id; })) return;
    preload(it);
    queue.push(it);
    if (queue.length === 1) show();
  }

  function say(msg) { statusEl.textContent = msg; }

  // ---- the tally ----
  // The server's figure is exact only if no vote or undo from this screen
  // overlapped the request that read it: a claim answered after a vote may
  // have counted before that vote committed. So the screen keeps its own
  // figure, moved by each acknowledged vote and undo, and asks for the
  // server's (which also brings in work done in another tab) only on a
  // quiet exchange and at most every half minute: counting costs the
  // server a read of the day's votes.
  var mine = { votes: data.tally.votes, seconds: data.tally.seconds }, writes = 0, writing = 0, voteSecs = {},
    tallyAt = performance.now();
  function askTally() { return writing === 0 && performance.now() - tallyAt > 30000; }
  function drawTally() {
    $("lab-votes").textContent = String(mine.votes);
    var m = Math.round(mine.seconds / 60);
    $("lab-time").textContent = Math.floor(m / 60) + ":" + ("0" + (m % 60)).slice(-2);
  }
  // exchange is called as a request is sent (write: a vote or an undo);
  // the function it returns is called on the answer or the failure and
  // says whether the exchange was quiet.
  function exchange(write) {
    var idle = writing === 0;
    if (write) { writes++; writing++; }
    var w = writes;
    return function () {
      if (write) writing--;
      return idle && writes === w;
    };
  }
  function tally(t, quiet, votes, seconds) {
    if (quiet && t) { mine.votes = t.votes; mine.seconds = t.seconds; tallyAt = performance.now(); }
    else { mine.votes = Math.max(0, mine.votes + votes); mine.seconds = Math.max(0, mine.seconds + seconds); }
    drawTally();
  }

  // post sends JSON and retries network failures (not refusals) a few
  // times: the server makes retries safe.
  function post(path, body, tries) {
    tries = tries || 3;
    return fetch(api + path, {
      method: "POST", credentials: "same-origin",
      headers: { "Content-Type": "application/json", "Accept": "application/json" },
      body: JSON.stringify(body)
    }).then(function (r) {
      return r.json().then(function (j) {
        if (!r.ok) throw { refused: true, msg: j.error || ("Error " + r.status) };
        return j;
      });
    }, function (e) {
      if (tries > 1) {
        return new Promise(function (ok) { setTimeout(ok, 400); }).then(function () { return post(path, body, tries - 1); });
      }
      throw { msg: "The server cannot be reached; check your connection and try again." };
    });
  }
  function fail(e) { say(e.msg || String(e)); }

  // fill keeps two items claimed, one request at a time.
  function fill() {
    if (queue.length >= 2 || busy) return Promise.resolve();
    busy = true;
    var ask = askTally(), ended = exchange(false);
    return post("/next", { exclude: held(), tally: ask }).then(function (j) {
      busy = false;
      tally(j.tally, ended(), 0, 0);
      var before = queue.length;
      add(j.next);
      if (queue.length > before) { stale = 0; return fill(); }
      // An answer to a request sent before a skip or vote may offer an item
      // already dealt with; add drops it, so ask again with the new list,
      // a few times and more slowly each time, never in a tight loop.
      if (j.next && dealtWith(j.next.id) && stale < 5) {
        stale++;
        return new Promise(function (ok) { setTimeout(ok, 100 * stale); }).then(fill);
      }
      if (!queue.length) show();
    }, function (e) { busy = false; ended(); fail(e); });
  }

  function uuid() {
    if (window.crypto && crypto.randomUUID) return crypto.randomUUID();
    var b = crypto.getRandomValues(new Uint8Array(16)), h = [];
    b[6] = (b[6] & 15) | 64;
    b[8] = (b[8] & 63) | 128;
    for (var i = 0; i < 16; i++) h.push((b[i] + 256).toString(16).slice(1));
    return h.slice(0, 4).join("") + "-" + h.slice(4, 6).join("") + "-" + h.slice(6, 8).join("") + "-" +
      h.slice(8, 10).join("") + "-" + h.slice(10).join("");
  }

  function vote(key) {
    var it = queue[0];
    if (!it) return;
    var secs = Math.min((performance.now() - shownAt) / 1000, 86400);
    queue.shift();
    dealt(it.id);
    var body = { id: uuid(), item: it.id, label: key, seconds: Math.round(secs * 100) / 100, exclude: held(), tally: askTally() };
    show();
    say(key == null ? "Saved: can't tell." : "Saved: " + byKey(key) + ".");
    voteSecs[it.id] = body.seconds;
    var ended = exchange(true);
    post("/votes", body).then(function (j) {
      tally(j.tally, ended(), 1, body.seconds);
      if (j.feedback) {
        say(j.feedback.correct ? "Check item: right, it is " + j.feedback.expected + "." :
          "Check item: the expected label was " + j.feedback.expected + ".");
      }
      add(j.next);
      return fill();
    }, function (e) { ended(); fail(e); });
  }
  function byKey(k) {
    for (var i = 0; i < data.labels.length; i++) if (data.labels[i].key === k) return data.labels[i].name;
    return k;
  }

  function skip() {
    var it = queue.shift();
    if (!it) return;
    dealt(it.id);
    show();
    say("Skipped.");
    post("/skip", { item: it.id, exclude: held() }).then(function (j) { add(j.next); return fill(); }, fail);
  }

  function undo() {
    var ended = exchange(true);
    post("/undo", {}).then(function (j) {
      // A vote taken back that was cast in another tab moves the time by
      // an unknown amount until the next quiet exchange.
      tally(j.tally, ended(), -1, -(j.item && voteSecs[j.item.id] || 0));
      if (!j.item) return;
      done = done.filter(function (id) { return id !== j.item.id; });
      queue = queue.filter(function (q) { return q.id !== j.item.id; });
      preload(j.item);
      queue.unshift(j.item);
      show();
      say("Vote taken back; label this image again.");
    }, function (e) { ended(); fail(e); });
  }

  // ---- keys ----
  document.addEventListener("keydown", function (e) {
    if (e.ctrlKey || e.metaKey || e.altKey) return;
    var inSearch = document.activeElement === search;
    if (inSearch) {
      if (e.key === "Escape") { e.preventDefault(); search.value = ""; search.blur(); draw(); }
      else if (e.key === "Enter") { e.preventDefault(); var m = matches(); if (m.length) { search.blur(); vote(m[0].key); } }
      else if (e.key === "ArrowDown") { e.preventDefault(); var f = choicesEl.querySelector("button"); if (f) f.focus(); }
      return;
    }
    if (e.target && (e.target.tagName === "INPUT" || e.target.tagName === "TEXTAREA")) return;
    var list = current();
    if (e.key >= "1" && e.key <= "9") {
      var c = list[Number(e.key) - 1];
      if (c) { e.preventDefault(); pick(c); }
    } else if (e.key === "0") { e.preventDefault(); vote(null); }
    else if (e.key === "s" || e.key === "S") { e.preventDefault(); skip(); }
    else if (e.key === "u" || e.key === "U" || e.key === "Backspace") { e.preventDefault(); undo(); }
    else if (e.key === "/") { e.preventDefault(); search.focus(); }
    else if (e.key === "Escape") { e.preventDefault(); up(); }
    else if (e.key === "Enter" && top().node && document.activeElement.tagName !== "BUTTON") {
      e.preventDefault(); vote(top().node.key);
    }
  });
  search.addEventListener("input", function () {
    // The "/" that opened the search is not part of it (some input paths
    // deliver its character after focus moved).
    if (search.value.charAt(0) === "/") search.value = search.value.slice(1);
    draw();
  });
  $("lab-cant").addEventListener("click", function () { vote(null); });
  $("lab-skip").addEventListener("click", skip);
  $("lab-undo").addEventListener("click", undo);

  drawTally();
  reset();
  fill();
})();
