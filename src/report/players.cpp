// The report's players: source, copy, the copy's partials alone, its noise alone and the
// residual (source minus copy) embedded as WAV; any one partial rendered on demand in the page
// by a small inline script from the patch's numbers (so 80 partials cost a few kB, not 80 WAVs).
#include <algorithm>
#include <cmath>
#include <vector>

#include "core/units.hpp"
#include "report/media.hpp"
#include "report/sections.hpp"
#include "report/svg_plot.hpp"

namespace wane::report_sections {

namespace {

using namespace report_plot;

constexpr double silence_amp = 1e-10;  // -200 dBFS: the peak shown for digital silence

// The partial renderer of the page: the envelope of core/envelope.hpp (a linear amplitude rise
// over attack_s to the peak, then straight dB segments, t60 null = hold, negative = rise) times
// cos(2 pi f t + phase + the glide's phase of core/glide.hpp: G - R(t), R by the same 16-term
// series of Ein), times the patch's gain; a 16-bit WAV made in memory. It leaves out the
// renderer's band-limit and end fades (a partial alone, for listening). Scaled down, and said so,
// when its peak passes full scale.
constexpr const char* solo_script = R"JS(
(function () {
  const data = JSON.parse(document.getElementById('patch-data').textContent);
  function levelDb(q, t) {
    let level = q.peak_db, start = q.attack_s;
    for (const [t60, until] of q.decay) {
      const end = until === null ? Infinity : until;
      if (end <= start) continue;
      const slope = t60 === null ? 0 : -60 / t60;
      if (t < end) return level + slope * (t - start);
      level += slope * (end - start);
      start = end;
    }
    return level;
  }
  function glideRemaining(q, t) {
    if (!q.glide_cents) return 0;
    const u = q.glide_cents * Math.LN2 / 1200 * Math.exp(-t / q.glide_s);
    let term = 1, ein = 0;
    for (let k = 1; k <= 16; k++) { term *= u / k; ein += term / k; }
    return 2 * Math.PI * q.freq_hz * q.glide_s * ein;
  }
  function render(q) {
    const n = Math.round(data.length_s * data.rate_hz), x = new Float32Array(n);
    const gain = Math.pow(10, data.gain_db / 20), peakAmp = Math.pow(10, q.peak_db / 20);
    const settled = q.phase_rad + glideRemaining(q, 0);
    for (let k = 0; k < n; k++) {
      const t = k / data.rate_hz;
      const a = t < q.attack_s ? peakAmp * t / q.attack_s : Math.pow(10, levelDb(q, t) / 20);
      x[k] = gain * a * Math.cos(2 * Math.PI * q.freq_hz * t + settled - glideRemaining(q, t));
    }
    return x;
  }
  function wav(x, rate) {
    let peak = 0;
    for (const v of x) peak = Math.max(peak, Math.abs(v));
    const scale = peak > 1 ? 1 / peak : 1, bytes = new DataView(new ArrayBuffer(44 + 2 * x.length));
    const text = (at, s) => { for (let i = 0; i < s.length; i++) bytes.setUint8(at + i, s.charCodeAt(i)); };
    text(0, 'RIFF'); bytes.setUint32(4, 36 + 2 * x.length, true); text(8, 'WAVEfmt ');
    bytes.setUint32(16, 16, true); bytes.setUint16(20, 1, true); bytes.setUint16(22, 1, true);
    bytes.setUint32(24, rate, true); bytes.setUint32(28, 2 * rate, true); bytes.setUint16(32, 2, true);
    bytes.setUint16(34, 16, true); text(36, 'data'); bytes.setUint32(40, 2 * x.length, true);
    for (let k = 0; k < x.length; k++) bytes.setInt16(44 + 2 * k, Math.round(32767 * scale * x[k]), true);
    return { blob: new Blob([bytes], { type: 'audio/wav' }), peak: peak };
  }
  const player = document.getElementById('solo-player'), label = document.getElementById('solo-label');
  document.querySelectorAll('button.solo').forEach(function (button) {
    button.addEventListener('click', function () {
      const i = Number(button.dataset.partial), q = data.partials[i], w = wav(render(q), data.rate_hz);
      if (player.src) URL.revokeObjectURL(player.src);
      player.src = URL.createObjectURL(w.blob);
      label.textContent = 'partial ' + (i + 1) + ', ' + q.freq_hz.toFixed(1) + ' Hz, peak ' +
        (20 * Math.log10(Math.max(w.peak, 1e-10))).toFixed(1) + ' dBFS' +
        (w.peak > 1 ? ' (scaled down to avoid clipping)' : '');
      player.play().catch(function () {});
    });
  });
  document.querySelectorAll("input[name='freq-axis']").forEach(function (r) {
    r.addEventListener('change', function () { document.body.dataset.axis = r.value; });
  });
  const tracks = document.getElementById('show-tracks');
  if (tracks) tracks.addEventListener('change', function () { document.body.dataset.tracks = tracks.checked ? 'on' : 'off'; });
  if (location.hash === '#check-solo' && data.partials.length > 0) {
    // For tests: the peak of partial 1 as rendered here, in dBFS (page opened as file.html#check-solo).
    let peak = 0;
    for (const v of render(data.partials[0])) peak = Math.max(peak, Math.abs(v));
    document.body.dataset.soloPeakDb = (20 * Math.log10(Math.max(peak, 1e-10))).toFixed(2);
    // And samples of the first 8 partials at 64 instants spread over the note (k = 0 and then
    // every n/64), for a test to hold against the C++ renderer's render of each partial alone.
    const n = Math.round(data.length_s * data.rate_hz), at = [];
    for (let j = 0; j < 64; j++) at.push(Math.floor(j * n / 64) + (j % 7));
    document.body.dataset.soloSamples = JSON.stringify(data.partials.slice(0, 8).map(function (q) {
      const x = render(q);
      return at.map(function (k) { return [k, x[k]]; });
    }));
  }
  document.body.dataset.ready = 'yes';
})();
)JS";

std::string json_number(double v) { return std::isfinite(v) ? fmt("%.9g", v) : "null"; }

/// The numbers the script renders from: rate, length, gain and every partial.
std::string patch_json(const patch& p, double rate_hz) {
    std::string o = "{\"rate_hz\": " + json_number(std::round(rate_hz)) + ", \"length_s\": " + json_number(p.note.length_s) +
                    ", \"gain_db\": " + json_number(p.note.gain_db) + ", \"partials\": [";
    for (std::size_t i = 0; i < p.partials.size(); ++i) {
        const partial& q = p.partials[i];
        o += (i ? ",\n" : "\n") + std::string("{\"freq_hz\": ") + json_number(q.freq_hz) + ", \"phase_rad\": " +
             json_number(q.phase_rad) + ", \"glide_cents\": " + json_number(q.glide_cents) + ", \"glide_s\": " +
             json_number(q.glide_s) + ", \"attack_s\": " + json_number(q.env.attack_s) + ", \"peak_db\": " +
             json_number(q.env.peak.db) + ", \"decay\": [";
        for (std::size_t k = 0; k < q.env.decay.size(); ++k) {
            const decay_segment& s = q.env.decay[k];
            o += (k ? ", [" : "[") + json_number(s.t60_s) + ", " + (s.until_s ? json_number(*s.until_s) : "null") + "]";
        }
        o += "]}";
    }
    return o + "]}";
}

void player(std::ostringstream& h, const std::string& id, const std::string& label, std::span<const float> audio,
            double rate_hz, const std::string& note = {}) {
    float peak = 0.0f;
    for (const float v : audio) peak = std::max(peak, std::abs(v));
    h << "<p id='" << id << "'><b>" << escape_html(label) << "</b> (" << seconds_text(static_cast<double>(audio.size()) / rate_hz)
      << ", " << fmt("%.0f Hz", rate_hz) << ", peak "
      << fmt("%.1f dBFS", to_level(amp_lin{std::max(static_cast<double>(peak), silence_amp)}).db);
    if (peak > 1.0f) h << "; scaled down by " << fmt("%.1f dB", to_level(amp_lin{static_cast<double>(peak)}).db) << " to avoid clipping";
    h << ")" << escape_html(note) << "<br><audio controls preload='metadata' src='data:audio/wav;base64,"
      << base64_encode(wav_bytes(audio, rate_hz)) << "'></audio></p>\n";
}

}  // namespace

void write_listen(std::ostringstream& h, const report_inputs& in) {
    h << "<section id='listen'><h2>Listen</h2><p class='note'>Audition at low volume first. The partials, noise and "
      << "residual players hold at most the first " << fmt("%.0f s", in.extra_player_max_s) << " (the page stays small).</p>\n";
    if (!in.source_audio.empty()) {
        player(h, "play-source", "Source" + (in.source_name.empty() ? std::string() : ": " + in.source_name), in.source_audio,
               in.source_rate_hz);
    }
    if (!in.render_audio.empty()) player(h, "play-copy", "Copy: the render of the patch", in.render_audio, in.render_rate_hz);
    auto first = [&](std::span<const float> x, double rate_hz) {
        return x.first(std::min(x.size(), static_cast<std::size_t>(std::lround(in.extra_player_max_s * rate_hz))));
    };
    if (!in.partials_audio.empty()) player(h, "play-partials", "Partials only", first(in.partials_audio, in.render_rate_hz), in.render_rate_hz);
    if (!in.noise_audio.empty()) player(h, "play-noise", "Noise only", first(in.noise_audio, in.render_rate_hz), in.render_rate_hz);
    if (!in.copy_in_source.empty() && in.copy_in_source.size() == in.source_audio.size()) {
        std::vector<float> residual(in.source_audio.begin(), in.source_audio.end());
        for (std::size_t n = 0; n < residual.size(); ++n) residual[n] -= in.copy_in_source[n];
        player(h, "play-residual", "Residual: source minus copy", first(residual, in.source_rate_hz), in.source_rate_hz,
               " what the copy leaves out or adds");
    }
    h << "<p id='play-solo'><b>One partial alone</b>: press a partial's button under its envelope plot. <span "
         "id='solo-label'></span><br><audio id='solo-player' controls></audio></p>\n"
      << "<script type='application/json' id='patch-data'>" << patch_json(*in.value, in.source_rate_hz) << "</script>\n"
      << "<script>" << solo_script << "</script>\n</section>\n";
}

}  // namespace wane::report_sections
