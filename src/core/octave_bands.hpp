// The octave bands of IEC 61260-1:2014 (base-ten system; clause numbers from memory), one home
// for the measurement filters (measure/octave_filter) and the noise bands (core/noise_bands):
//   octave frequency ratio G = 10^(3/10)                        (IEC 61260-1:2014, 5.2)
//   exact mid-band frequency f_m = f_r * G^x, f_r = 1000 Hz      (IEC 61260-1:2014, 5.4, b = 1)
//   band edges f_1 = f_m * G^(-1/2), f_2 = f_m * G^(+1/2)        (IEC 61260-1:2014, 5.6)
#pragma once

#include <vector>

namespace wane {

/// 10^(3/10): the base-ten octave frequency ratio (IEC 61260-1:2014, 5.2).
inline constexpr double octave_ratio_base10 = 1.9952623149688795;
/// f_r: the reference frequency of the band series (IEC 61260-1:2014, 5.4).
inline constexpr double octave_reference_hz = 1000.0;

struct octave_band {
    int index = 0;                ///< x in f_m = f_r * G^x (0 is the 1 kHz band)
    double nominal_hz = 0.0;      ///< nominal mid-band frequency (31.5, 63, 125, ... 16000)
    double exact_mid_hz = 0.0;    ///< f_m
    double lower_edge_hz = 0.0;   ///< f_m * G^(-1/2)
    double upper_edge_hz = 0.0;   ///< f_m * G^(+1/2)
};

/// The octave band with index x (x = -5 .. 4: nominal 31.5 Hz .. 16 kHz).
octave_band octave_band_at(int index);

/// The bands with nominal mid-band frequency in [lowest_nominal_hz, highest_nominal_hz] whose
/// upper edge lies below max_edge_fraction of the Nyquist frequency, lowest first.
std::vector<octave_band> octave_bands_within(double sample_rate_hz, double lowest_nominal_hz,
                                             double highest_nominal_hz, double max_edge_fraction = 0.9);

}  // namespace wane
