// The headline of a comparison and the definitions of its figures (see fidelity.hpp).
#include "measure/fidelity.hpp"

#include <cmath>

#include "core/text_format.hpp"

namespace wane {

std::string fidelity_headline(const compare_result& r) {
    const double lsd = r.whole.log_spectral_distance_db, snr = r.early_snr_db;
    std::string s = "fidelity: log-spectral distance ";
    s += std::isfinite(lsd) ? printf_text("%.2f dB", lsd) : std::string("not measurable");
    s += " (whole note), onset SNR ";
    if (std::isinf(snr) && snr > 0.0) s += "identical";
    else s += std::isfinite(snr) ? printf_text("%.2f dB", snr) : std::string("not measurable");
    s += printf_text(" (first %.0f ms)", 1000.0 * r.early_window_s);
    return s;
}

std::vector<std::pair<std::string, std::string>> figure_definitions() {
    const compare_params d{};
    std::string sizes;
    for (const int n : d.spectral.fft_sizes) sizes += (sizes.empty() ? "" : ", ") + std::to_string(n);
    return {
        {"log-spectral distance (the headline)",
         "sqrt(mean of (10 log10 P_copy - 10 log10 P_recording)^2) over STFT bins within " +
             printf_text("%.0f", d.spectral.range_db) + " dB of the recording's peak, Hann window, sizes " + sizes +
             ", hop = size/" + std::to_string(d.spectral.hop_divisor) +
             ", averaged over the sizes; in dB, 0 = the same spectra, larger = further apart. It judges what is "
             "loud: a pure gain error of g dB gives g dB, and the floor more than 60 dB down does not count. "
             "(The benchmark's figure, tools/eval_fidelity.py, is another: per-frame RMS over every bin floored "
             "100 dB down, averaged over frames; it also weighs the quiet floor and the tail, so the two can rank "
             "copies differently.)"},
        {"onset SNR", "10 log10(sum a^2 / sum (a - b)^2) over the first " + printf_text("%.0f", 1000.0 * d.early_window_s) +
                          " ms after the recording's onset, sample by sample after alignment; in dB, larger = closer "
                          "(it counts phase: two sounds with the same spectrum and other phases score near 0 dB)"},
        {"spectral convergence", "|| |S_rec| - |S_copy| ||_F / || |S_rec| ||_F over the same STFTs (all bins); 0 = identical"},
        {"T20, T30", "octave-band decay times by Schroeder backward integration, fitted over -5..-25 dB (T20) and "
                     "-5..-35 dB (T30), extrapolated to 60 dB (ISO 3382-1)"},
        {"f0 and tuning difference", "cents of the copy against the recording (f0 by the analysis's estimator; "
                                     "tuning: median over the five strongest partials paired)"},
        {"difference cells", "power of both in third-octave bands x time spans from the onset (0, 20, 50, 100, 200, "
                             "500 ms, 1, 2, 4 s, ...) from a " +
                                 printf_text("%.0f", 1000.0 * d.remarks.cells.window_s) +
                                 " ms Hann STFT; copy minus recording in dB, cells where both are more than " +
                                 printf_text("%.0f", d.remarks.cells.range_db) +
                                 " dB below the recording's loudest cell left out; the sentences name the connected "
                                 "regions of at least " + printf_text("%.0f", d.remarks.cells.threshold_db) +
                                 " dB, largest first"},
        {"missing partial", "a peak of the recording's spectrum over the first " +
                                printf_text("%.0f", 1000.0 * d.remarks.spectrum_span_s) + " ms (within " +
                                printf_text("%.0f", d.remarks.partial_range_db) + " dB of its loudest, " +
                                printf_text("%.0f", d.remarks.partial_prominence_db) +
                                " dB over its surroundings) where the copy is at least " +
                                printf_text("%.0f", d.remarks.missing_below_db) + " dB quieter"},
        {"smeared onset", "the copy takes more than " + printf_text("%.0f", 1000.0 * d.remarks.smeared_by_s) +
                              " ms longer than the recording to come within 3 dB of the loudest 2 ms frame of its "
                              "first 200 ms"},
    };
}

}  // namespace wane
