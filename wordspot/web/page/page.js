// wordspot recording page: record takes from the microphone, keep them, train, try, listen.
// Plain JavaScript, no framework; talks only to the server that served it.
"use strict";

const $ = (id) => document.getElementById(id);
const MAX_SECONDS = 15;

const page = {
  state: null,        // last /api/state answer
  index: 0,           // selected word
  audio: null,        // {stream, context, source, node} only while the microphone is open
  opening: false,     // true while the browser is asked for the microphone
  player: null,       // the audio context playing a take back (no microphone in it)
  recording: null,    // "take" or "try" while recording, "listen" while listening for commands
  chunks: [],
  pending: null,      // {samples, rate, body, check} of the take waiting for keep/redo
  timer: null,
  polling: null,
  listen: null,       // {id, rate, maxSamples, queue, queued, flight, heard, skipped} while listening
};
// Listening sends the microphone's samples in blocks of about this many seconds; if the
// server falls further behind than LISTEN_MAX_BEHIND, the oldest waiting sound is skipped.
const LISTEN_BLOCK_SECONDS = 0.25;
const LISTEN_MAX_BEHIND = 10;
const HEARD_ROWS = 100;

// ---- talking to the server -------------------------------------------------------------
// The server writes its session key into the page; every request that changes something
// sends it back, which other web pages cannot do (they cannot read this page).
const SESSION = document.querySelector('meta[name="wordspot-session"]').content;

async function api(path, options) {
  options = Object.assign({}, options);
  if (options.method && options.method !== "GET") {
    options.headers = Object.assign({"Wordspot-Session": SESSION}, options.headers);
  }
  const answer = await fetch(path, options);
  let data = null;
  try { data = await answer.json(); } catch (e) { data = {error: "the server sent no answer"}; }
  if (!answer.ok) throw new Error(data.error || ("error " + answer.status));
  return data;
}

function postAudio(path, body) {
  return api(path, {method: "POST", headers: {"Content-Type": "audio/wav"}, body: body});
}

function postJson(path, data) {
  return api(path, {method: "POST", headers: {"Content-Type": "application/json"}, body: JSON.stringify(data)});
}

function say(text, isError) {
  const s = $("status");
  s.textContent = text;
  s.className = isError ? "error" : "";
}

// ---- the word list ----------------------------------------------------------------------
async function refresh() {
  const who = encodeURIComponent($("speaker").value.trim());
  page.state = await api("/api/state" + (who ? "?speaker=" + who : ""));
  render();
}

function currentWord() {
  const words = page.state ? page.state.words : [];
  return words.length ? words[Math.min(page.index, words.length - 1)] : null;
}

function render() {
  const st = page.state;
  $("folder").textContent = st.folder;
  if (!$("speaker").value) $("speaker").value = st.speaker;
  const list = $("words");
  list.textContent = "";
  st.words.forEach((w, i) => {
    const li = document.createElement("li");
    const b = document.createElement("button");
    b.type = "button";
    b.dataset.index = String(i);
    b.setAttribute("aria-current", i === page.index ? "true" : "false");
    const name = document.createElement("span");
    name.textContent = w.word;
    const count = document.createElement("span");
    count.className = "count" + (w.to_record === 0 ? " done" : "");
    count.textContent = w.to_record === 0 ? "done" : w.to_record + " to record";
    b.append(name, count);
    b.setAttribute("aria-label", w.word + ": " + count.textContent);
    b.addEventListener("click", () => select(i, false));
    li.append(b);
    list.append(li);
  });
  const w = currentWord();
  $("current-word").textContent = w ? w.word : "(add a word first)";
  $("current-phones").textContent = w ? "(" + w.pronunciations.join(" or ") + ")" : "";
  $("takes-left").textContent = w
    ? (w.train + w.held_out) + " of " + st.takes_per_word + " takes recorded by " + st.speaker +
      (w.held_out ? " (" + w.held_out + " kept for testing)" : "")
    : "";
  renderTraining(st.training);
  const notes = $("notes");
  notes.textContent = "";
  st.notes.forEach((n) => { const li = document.createElement("li"); li.textContent = n; notes.append(li); });
  $("notes-panel").hidden = st.notes.length === 0;
}

function select(i, focus) {
  const n = page.state ? page.state.words.length : 0;
  if (!n || (page.recording && page.recording !== "listen")) return;
  page.index = (i + n) % n;
  discard(false);
  render();
  if (focus) {
    const b = document.querySelector('#words button[data-index="' + page.index + '"]');
    if (b) { b.focus(); b.scrollIntoView({block: "nearest"}); }
  }
}

function nextWordToRecord() {
  const words = page.state.words;
  for (let k = 1; k <= words.length; k++) {
    const j = (page.index + k) % words.length;
    if (words[j].to_record > 0) return j;
  }
  return page.index;
}

// ---- the microphone ---------------------------------------------------------------------
// Opened for one recording and released as soon as it ends: every track stopped, the audio
// graph disconnected and closed, no reference kept; so the browser stops showing the page
// as listening, and the sign at the top of the page says which it is.
async function openMicrophone() {
  if (page.audio) return page.audio;
  if (!navigator.mediaDevices || !navigator.mediaDevices.getUserMedia) {
    throw new Error("this browser cannot use the microphone here; open the page at http://127.0.0.1");
  }
  const stream = await navigator.mediaDevices.getUserMedia(
    {audio: {echoCancellation: false, noiseSuppression: false, autoGainControl: false, channelCount: 1}});
  const audio = {stream: stream, context: null, source: null, node: null};
  page.audio = audio;
  showMicrophone();
  stream.getTracks().forEach((t) => t.addEventListener("ended", microphoneLost));
  try {
    audio.context = new AudioContext();
    await audio.context.audioWorklet.addModule("/page/capture-worklet.js");
    if (page.audio !== audio) throw new Error("it was closed while opening");
    audio.source = audio.context.createMediaStreamSource(stream);
    audio.node = new AudioWorkletNode(audio.context, "wordspot-capture");
    audio.node.port.onmessage = (event) => onBlock(event.data);
    audio.source.connect(audio.node);
  } catch (e) {
    releaseAudio(audio);
    throw e;
  }
  return audio;
}

function releaseAudio(audio) {
  if (audio.stream) audio.stream.getTracks().forEach((t) => { t.removeEventListener("ended", microphoneLost); t.stop(); });
  if (audio.node) { audio.node.port.onmessage = null; audio.node.disconnect(); }
  if (audio.source) audio.source.disconnect();
  if (audio.context && audio.context.state !== "closed") audio.context.close().catch(() => {});
  audio.stream = audio.context = audio.source = audio.node = null;
  if (page.audio === audio) page.audio = null;
  showMicrophone();
}

function closeMicrophone() {
  if (page.audio) releaseAudio(page.audio);
}

function showMicrophone() {
  const on = page.audio !== null;
  $("mic-state").dataset.on = on ? "true" : "false";
  $("mic-text").textContent = on ? "Microphone on" : "Microphone off";
}

// The browser ended the microphone itself (unplugged, or permission taken back).
function microphoneLost() {
  if (page.recording === "listen") {
    stopListening("The microphone stopped, so listening ended; check that it is plugged in and allowed.", true);
  } else if (page.recording) {
    stopRecording();
    say("The microphone stopped during the take; check that it is plugged in and allowed.", true);
  } else {
    closeMicrophone();
  }
}

let shownLevel = -60, loudestSinceDrawn = -60;
function onBlock(block) {
  let peak = 0;
  for (let i = 0; i < block.length; i++) { const a = Math.abs(block[i]); if (a > peak) peak = a; }
  const db = peak > 0 ? Math.max(-60, 20 * Math.log10(peak)) : -60;
  if (db > loudestSinceDrawn) loudestSinceDrawn = db;
  if (page.recording === "listen" && page.listen) {
    queueListen(page.listen, block);
  } else if (page.recording && page.audio) {
    page.chunks.push(block);
    const seconds = page.chunks.length * block.length / page.audio.context.sampleRate;
    if (seconds >= MAX_SECONDS) stopRecording();
  }
}

function drawMeter() {
  shownLevel = Math.max(loudestSinceDrawn, shownLevel - 1);   // rises at once, falls about 60 dB a second
  loudestSinceDrawn = -60;
  $("meter").value = shownLevel;
  $("meter").textContent = Math.round(shownLevel) + " dB";
  $("meter-text").textContent = page.audio ? Math.round(shownLevel) + " dB" : "off";
  requestAnimationFrame(drawMeter);
}

function joined() {
  let n = 0;
  page.chunks.forEach((c) => { n += c.length; });
  const out = new Float32Array(n);
  let at = 0;
  page.chunks.forEach((c) => { out.set(c, at); at += c.length; });
  page.chunks = [];
  return out;
}

// A mono 32-bit float WAV file; the server converts it to the model rate.
function wavBytes(samples, rate) {
  const buffer = new ArrayBuffer(44 + 4 * samples.length);
  const v = new DataView(buffer);
  const text = (at, s) => { for (let i = 0; i < s.length; i++) v.setUint8(at + i, s.charCodeAt(i)); };
  text(0, "RIFF"); v.setUint32(4, 36 + 4 * samples.length, true); text(8, "WAVE");
  text(12, "fmt "); v.setUint32(16, 16, true); v.setUint16(20, 3, true); v.setUint16(22, 1, true);
  v.setUint32(24, rate, true); v.setUint32(28, rate * 4, true); v.setUint16(32, 4, true); v.setUint16(34, 32, true);
  text(36, "data"); v.setUint32(40, 4 * samples.length, true);
  for (let i = 0; i < samples.length; i++) v.setFloat32(44 + 4 * i, samples[i], true);
  return new Blob([buffer], {type: "audio/wav"});
}

async function startRecording(kind) {
  if (page.recording || page.opening) return;
  page.opening = true;
  try {
    const audio = await openMicrophone();
    if (audio.context.state !== "running") await audio.context.resume();
  } catch (e) {
    closeMicrophone();
    say("The microphone could not be opened: " + e.message, true);
    return;
  } finally {
    page.opening = false;
  }
  discard(false);
  page.chunks = [];
  page.recording = kind;
  updateButtons();
  if (kind === "take") {
    $("record").classList.add("on");
    $("record").innerHTML = "Stop recording <kbd>R</kbd>";
    say("Recording… say “" + currentWord().word + "”, then press R.");
  } else {
    $("try-record").innerHTML = "Stop <kbd>T</kbd>";
    $("try-result").textContent = "Listening… say a command, then press T.";
  }
}

async function stopRecording() {
  const kind = page.recording;
  if (!kind) return;
  page.recording = null;
  const samples = joined();
  const rate = page.audio ? page.audio.context.sampleRate : 48000;
  closeMicrophone();
  updateButtons();
  if (kind === "try") {
    $("try-record").innerHTML = "Record a test <kbd>T</kbd>";
    return tryModel(samples, rate);
  }
  $("record").classList.remove("on");
  $("record").innerHTML = "Record <kbd>R</kbd>";
  if (samples.length < rate * 0.1) { say("That was too short to use; press R and say the word.", true); return; }
  const body = wavBytes(samples, rate);
  say("Checking the take…");
  try {
    const check = await postAudio("/api/check", body);
    page.pending = {samples: samples, rate: rate, body: body, check: check};
    drawTake(samples, rate, check);
    showCheck(check, samples.length / rate);
    ["play", "keep", "redo"].forEach((id) => { $(id).disabled = false; });
    say(check.warnings.length ? "Listen to it, then keep it or record again."
                              : "Sounds fine. Press K to keep it, or A to record again.");
  } catch (e) {
    say("The take could not be checked: " + e.message, true);
  }
}

function showCheck(check, seconds) {
  $("take-summary").textContent = "Kept " + (check.end - check.start).toFixed(2) + " s of " + seconds.toFixed(2) +
    " s (quiet ends trimmed); loudest point " + (check.peak_db === null ? "silent" : check.peak_db + " dB") + ".";
  const list = $("warnings");
  list.textContent = "";
  check.warnings.forEach((w) => { const li = document.createElement("li"); li.textContent = w; list.append(li); });
}

function drawTake(samples, rate, check) {
  const canvas = $("waveform");
  const g = canvas.getContext("2d");
  const w = canvas.width, h = canvas.height, mid = h / 2;
  g.fillStyle = "#ffffff"; g.fillRect(0, 0, w, h);
  const seconds = samples.length / rate;
  const x0 = Math.round(w * check.start / seconds), x1 = Math.round(w * check.end / seconds);
  g.fillStyle = "#d9d9d9";
  g.fillRect(0, 0, x0, h); g.fillRect(x1, 0, w - x1, h);
  const step = Math.max(1, Math.floor(samples.length / w));
  g.strokeStyle = "#0b4f8a";
  g.beginPath();
  for (let x = 0; x < w; x++) {
    let lo = 0, hi = 0;
    for (let i = x * step; i < Math.min(samples.length, (x + 1) * step); i++) {
      if (samples[i] < lo) lo = samples[i];
      if (samples[i] > hi) hi = samples[i];
    }
    g.moveTo(x + 0.5, mid - hi * mid); g.lineTo(x + 0.5, mid - lo * mid + 1);
  }
  g.stroke();
  g.fillStyle = "#111"; g.font = "14px sans-serif";
  if (x0 > 40) g.fillText("trimmed", 4, 16);
  if (w - x1 > 40) g.fillText("trimmed", x1 + 4, 16);
  canvas.setAttribute("aria-label", "Waveform of the last take: " + seconds.toFixed(2) + " s, of which " +
    (check.end - check.start).toFixed(2) + " s are kept");
}

function discard(tell) {
  page.pending = null;
  ["play", "keep", "redo"].forEach((id) => { $(id).disabled = true; });
  if (tell) say("Take thrown away. Press R to record again.");
}

// Plays the kept part through an output-only audio context, closed when it ends.
function play() {
  const p = page.pending;
  if (!p) return;
  stopPlaying();
  const ctx = new AudioContext();
  page.player = ctx;
  const buffer = ctx.createBuffer(1, p.samples.length, p.rate);
  buffer.copyToChannel(p.samples, 0);
  const src = ctx.createBufferSource();
  src.buffer = buffer;
  src.connect(ctx.destination);
  src.onended = () => { if (page.player === ctx) stopPlaying(); };
  src.start(0, p.check.start, Math.max(0.01, p.check.end - p.check.start));
  say("Playing the kept part…");
}

function stopPlaying() {
  if (page.player) { page.player.close().catch(() => {}); page.player = null; }
}

async function keep() {
  const p = page.pending;
  const w = currentWord();
  if (!p || !w) return;
  discard(false);
  const query = "?word=" + encodeURIComponent(w.word) + "&speaker=" + encodeURIComponent($("speaker").value.trim()) +
    "&held_out=" + ($("held-out").checked ? "1" : "0");
  try {
    const saved = await postAudio("/api/take" + query, p.body);
    const holder = $("saved");
    holder.textContent = "";
    const label = document.createElement("p");
    label.textContent = "Last saved take (" + saved.word + "):";
    const player = document.createElement("audio");
    player.controls = true;
    player.preload = "none";
    player.src = "/takes/" + saved.path.split("/").map(encodeURIComponent).join("/");
    holder.append(label, player);
    await refresh();
    if (currentWord().to_record === 0) { page.index = nextWordToRecord(); render(); }
    say("Saved " + saved.path + " in " + saved.manifest + ".");
  } catch (e) {
    say("The take was not saved: " + e.message, true);
  }
}

// ---- adding words -------------------------------------------------------------------------
async function lookUp(event) {
  event.preventDefault();
  const word = $("new-word").value.trim();
  if (!word) return;
  try {
    const found = await postJson("/api/word", {word: word});
    if (found.known) {
      say("“" + found.word + "” is already in the list.");
      const i = page.state.words.findIndex((w) => w.word === found.word);
      if (i >= 0) select(i, true);
      return;
    }
    $("suggested-word").textContent = found.word;
    $("new-phones").value = found.pronunciations.length ? found.pronunciations[0] : "";
    $("suggestion-note").textContent = found.pronunciations.length
      ? "Suggested by the open CMU pronouncing dictionary" +
        (found.pronunciations.length > 1 ? " (others: " + found.pronunciations.slice(1).join("; ") + ")" : "") +
        ". Change it if it does not match how you say it."
      : "The dictionary does not know this word: type its sounds as ARPAbet phones, e.g. N IY D.";
    $("suggestion").hidden = false;
    $("new-phones").focus();
  } catch (e) {
    say(e.message, true);
  }
}

async function confirmWord() {
  try {
    const added = await postJson("/api/word/add", {word: $("suggested-word").textContent, phones: $("new-phones").value});
    $("suggestion").hidden = true;
    $("new-word").value = "";
    await refresh();
    const i = page.state.words.findIndex((w) => w.word === added.word);
    if (i >= 0) select(i, true);
    say("Added “" + added.word + "” (" + added.pronunciations.join(" or ") + ").");
  } catch (e) {
    say(e.message, true);
  }
}

// ---- training and trying --------------------------------------------------------------------
function renderTraining(t) {
  const st = page.state;
  $("train-command").textContent = st.train_command;
  const running = t.state === "running";
  $("train").disabled = !st.ready_to_train || running;
  let text;
  if (running) text = "Training… (" + Math.round(100 * t.progress) + "%)";
  else if (t.state === "failed") text = "Training stopped with an error; see the lines below.";
  else if (st.model) text = "A trained model is ready: " + st.model + ".";
  else if (st.ready_to_train) text = "Every word has enough takes: you can train now.";
  else text = "Every word needs " + st.min_train_takes + " training takes first (still short: " +
    (st.words_short_of_takes.join(", ") || "no words yet") + ").";
  $("train-state").textContent = text;
  $("train-progress").hidden = t.state === "idle";
  $("train-progress").value = t.progress;
  $("train-log").hidden = t.lines.length === 0;
  $("train-log").textContent = t.lines.join("\n");
  $("evaluate-line").hidden = !(st.model && st.evaluate_command);
  $("evaluate-command").textContent = st.evaluate_command || "";
  $("try-state").textContent = st.model ? "Say a command and see what the model hears." : "Train a model first.";
  if (!page.listen) {
    $("listen-state").textContent = st.model
      ? "Switch it on and say your commands: each one heard is listed with its confidence."
      : "Train a model first.";
  }
  updateButtons();
  if (running && !page.polling) page.polling = setInterval(pollTraining, 1000);
}

async function startTraining() {
  try {
    await api("/api/train", {method: "POST"});
    await refresh();
  } catch (e) {
    say(e.message, true);
  }
}

async function pollTraining() {
  try {
    const t = await api("/api/train");
    if (t.state !== "running") { clearInterval(page.polling); page.polling = null; await refresh(); return; }
    renderTraining(t);
  } catch (e) {
    clearInterval(page.polling); page.polling = null;
  }
}

async function tryModel(samples, rate) {
  if (samples.length < rate * 0.1) { $("try-result").textContent = "That was too short; press T and speak."; return; }
  $("try-result").textContent = "Recognising…";
  try {
    const r = await postAudio("/api/try", wavBytes(samples, rate));
    $("try-result").textContent = r.words.length
      ? "Heard: " + r.text + " — " + r.words.map((w) => w.word + " " + w.start.toFixed(2) + "–" + w.end.toFixed(2) +
          " s, confidence " + Math.round(100 * w.confidence) + "%").join("; ")
      : "Heard nothing (" + (r.reason || "no words") + ").";
  } catch (e) {
    $("try-result").textContent = "Could not recognise: " + e.message;
  }
}

// ---- listening for commands --------------------------------------------------------------------
// While Listen is on, the microphone stays open and its samples go to the server in blocks
// of about a quarter of a second (32-bit float at the browser's rate; the server converts
// them to the model rate); each answer brings the commands completed so far. Switching it
// off (or leaving the page) stops every track and closes the audio graph at once, then
// sends what was still waiting and asks the server to finish the stretch in progress.
function updateButtons() {
  const st = page.state;
  const listening = page.recording === "listen";
  const busy = page.recording !== null && !listening;
  $("record").disabled = !currentWord() || listening;
  $("try-record").disabled = !(st && st.model) || listening;
  $("listen-switch").disabled = !listening && (busy || !(st && st.model));
  $("listen-switch").setAttribute("aria-pressed", listening ? "true" : "false");
  $("listen-switch").classList.toggle("on", listening);
  $("listen-switch").innerHTML = (listening ? "Stop listening" : "Start listening") + " <kbd>S</kbd>";
}

function listenSay(text, isError) {
  const s = $("listen-status");
  s.textContent = text;
  s.className = isError ? "error" : "";
}

const LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

// The samples as raw little-endian 32-bit floats (what the server reads as "float32").
function rawSamples(samples) {
  if (LITTLE_ENDIAN) return samples.buffer.slice(samples.byteOffset, samples.byteOffset + samples.byteLength);
  const buffer = new ArrayBuffer(4 * samples.length);
  const v = new DataView(buffer);
  for (let i = 0; i < samples.length; i++) v.setFloat32(4 * i, samples[i], true);
  return buffer;
}

function takeQueued(l, most) {
  const n = Math.min(most, l.queued);
  const out = new Float32Array(n);
  let at = 0;
  while (at < n) {
    const head = l.queue[0];
    const k = Math.min(head.length, n - at);
    out.set(head.subarray(0, k), at);
    at += k;
    if (k === head.length) l.queue.shift(); else l.queue[0] = head.subarray(k);
  }
  l.queued -= n;
  return out;
}

function queueListen(l, block) {
  l.queue.push(block);
  l.queued += block.length;
  const over = l.queued - LISTEN_MAX_BEHIND * l.rate;
  if (over > 0) { takeQueued(l, over); l.skipped += over; }
  if (!l.flight && l.queued >= LISTEN_BLOCK_SECONDS * l.rate) l.flight = sendQueued(l);
}

function postBlock(l, samples) {
  return api("/api/listen/block?id=" + encodeURIComponent(l.id),
             {method: "POST", headers: {"Content-Type": "application/octet-stream"}, body: rawSamples(samples)});
}

// Sends the waiting sound, one request at a time, while this listening goes on.
async function sendQueued(l) {
  try {
    while (page.listen === l && l.queued >= LISTEN_BLOCK_SECONDS * l.rate) {
      showHeard(l, await postBlock(l, takeQueued(l, l.maxSamples)));
    }
  } catch (e) {
    if (page.listen === l) stopListening("Listening stopped: " + e.message, true);
  } finally {
    l.flight = null;
  }
}

function clockTime(seconds) {
  const m = Math.floor(seconds / 60);
  const s = seconds - 60 * m;
  return m + ":" + (s < 10 ? "0" : "") + s.toFixed(1);
}

function showHeard(l, answer) {
  const body = $("heard");
  answer.commands.forEach((c) => {
    const row = document.createElement("tr");
    const time = document.createElement("td");
    time.className = "number";
    time.textContent = clockTime(c.start);
    const words = document.createElement("td");
    words.className = "words";
    words.textContent = c.text;
    const sure = document.createElement("td");
    sure.className = "number";
    sure.textContent = Math.floor(100 * c.confidence) + "%";  // 0.996 is not shown as a sure 100%
    row.append(time, words, sure);
    body.prepend(row);
    l.heard += 1;
  });
  while (body.rows.length > HEARD_ROWS) body.deleteRow(body.rows.length - 1);
  $("heard-table").hidden = body.rows.length === 0;
  l.lost += answer.dropped || 0;  // commands beyond what the server keeps between two answers
  if (page.listen === l) {
    listenSay("Listening… " + heardCount(l) + (l.skipped ? "; some sound was skipped because the computer fell behind" : "") + ".");
  }
}

function heardCount(l) {
  return (l.heard === 1 ? "1 command" : l.heard + " commands") + " heard" +
    (l.lost ? " (" + l.lost + " more not shown)" : "");
}

async function startListening() {
  if (page.recording || page.opening || page.listen) return;
  page.opening = true;
  listenSay("Opening the microphone…");
  let audio;
  try {
    audio = await openMicrophone();
    if (audio.context.state !== "running") await audio.context.resume();
  } catch (e) {
    page.opening = false;
    closeMicrophone();
    listenSay("The microphone could not be opened: " + e.message, true);
    return;
  }
  try {
    const started = await postJson("/api/listen/start", {rate: audio.context.sampleRate, format: "float32"});
    if (page.audio !== audio) {
      api("/api/listen/stop?id=" + encodeURIComponent(started.id), {method: "POST"}).catch(() => {});
      throw new Error("the microphone was closed while starting");
    }
    page.listen = {id: started.id, rate: started.rate, maxSamples: Math.floor(started.max_block_bytes / 4),
                   queue: [], queued: 0, flight: null, heard: 0, skipped: 0, lost: 0};
    page.recording = "listen";
    $("listen-state").textContent = "Listening for: " + started.words.join(", ") + ".";
    listenSay("Listening… say a command.");
  } catch (e) {
    closeMicrophone();
    listenSay("Listening could not start: " + e.message, true);
  } finally {
    page.opening = false;
    updateButtons();
  }
}

// Switch listening off: the microphone is released at once; then the sound still waiting
// is sent (unless an error ended listening) and the stretch in progress is finished.
async function stopListening(message, isError) {
  const l = page.listen;
  if (!l) return;
  page.listen = null;
  page.recording = null;
  closeMicrophone();
  updateButtons();
  listenSay(message || "Finishing the last words…", isError);
  const stop = () => api("/api/listen/stop?id=" + encodeURIComponent(l.id), {method: "POST"});
  if (isError) { stop().catch(() => {}); return; }
  try {
    if (l.flight) await l.flight;
    while (l.queued > 0) showHeard(l, await postBlock(l, takeQueued(l, l.maxSamples)));
    showHeard(l, await stop());
    if (!page.listen) listenSay("Stopped listening; " + heardCount(l) + ". The microphone is off.");
  } catch (e) {
    if (!page.listen) listenSay("Stopped listening, but the last words could not be recognised: " + e.message, true);
  }
}

function toggleListening() {
  if (page.listen) stopListening(); else startListening();
}

// ---- keys ----------------------------------------------------------------------------------
// Each key is the first letter of a word on its button (shown there and in the help text):
// R record / stop, L listen, K keep, A record again, N next word, B back one word, T test,
// S start / stop listening for commands.
// Plain letters only, so no browser shortcut is taken; nothing happens while typing in a box.
function typing(target) {
  if (!target) return false;
  if (target.isContentEditable || target.tagName === "TEXTAREA" || target.tagName === "SELECT") return true;
  return target.tagName === "INPUT" && !["checkbox", "radio", "button", "submit", "reset"].includes(target.type);
}

function onKey(event) {
  if (typing(event.target) || event.altKey || event.ctrlKey || event.metaKey || event.key.length !== 1) return;
  const k = event.key.toLowerCase();
  if (event.repeat && (k === "r" || k === "t" || k === "s")) { event.preventDefault(); return; }
  if (k === "r") {
    if (page.recording === "take") stopRecording(); else if (!page.recording && currentWord()) startRecording("take");
  } else if (k === "n" || k === "b") {
    select(page.index + (k === "n" ? 1 : -1), true);
  } else if (k === "k" && page.pending) {
    keep();
  } else if (k === "a" && page.pending) {
    discard(true);
  } else if (k === "l" && page.pending) {
    play();
  } else if (k === "t" && !$("try-record").disabled) {
    if (page.recording === "try") stopRecording(); else if (!page.recording) startRecording("try");
  } else if (k === "s" && !$("listen-switch").disabled) {
    toggleListening();
  } else {
    return;
  }
  event.preventDefault();
}

function start() {
  $("record").addEventListener("click", () => { if (page.recording === "take") stopRecording(); else startRecording("take"); });
  $("play").addEventListener("click", play);
  $("keep").addEventListener("click", keep);
  $("redo").addEventListener("click", () => discard(true));
  $("add-word").addEventListener("submit", lookUp);
  $("confirm-word").addEventListener("click", confirmWord);
  $("train").addEventListener("click", startTraining);
  $("try-record").addEventListener("click", () => { if (page.recording === "try") stopRecording(); else startRecording("try"); });
  $("listen-switch").addEventListener("click", toggleListening);
  $("word-next").addEventListener("click", () => select(page.index + 1, false));
  $("word-back").addEventListener("click", () => select(page.index - 1, false));
  $("speaker").addEventListener("change", () => { discard(false); refresh().catch((e) => say(e.message, true)); });
  document.addEventListener("keydown", onKey);
  // leaving or closing the page releases the microphone even in the middle of a take
  window.addEventListener("pagehide", () => {
    const l = page.listen;
    page.listen = null;
    page.recording = null; page.chunks = []; closeMicrophone(); stopPlaying();
    if (l) {  // tell the server at once; it would free the session after its idle time anyway
      fetch("/api/listen/stop?id=" + encodeURIComponent(l.id),
            {method: "POST", keepalive: true, headers: {"Wordspot-Session": SESSION}}).catch(() => {});
    }
  });
  showMicrophone();
  updateButtons();
  requestAnimationFrame(drawMeter);
  refresh().catch((e) => say("The page could not reach wordspot: " + e.message, true));
}

start();
