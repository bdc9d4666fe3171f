package estimate

import "math"

// StandardSalinityKgPerKg is the absolute salinity of standard seawater,
// S_A = 35.165 04 g/kg (TEOS-10; the salinity of ITTC 7.5-02-01-03 Table 3).
const StandardSalinityKgPerKg = 0.03516504

// The water tables cover 0–40 °C at 0.101 325 MPa.
const (
	waterMinC = 0.0
	waterMaxC = 40.0
)

// freshWater1Atm holds fresh water at 0.101 325 MPa: {t °C, ρ kg/m³, μ Pa·s}.
//
// Source: IAPWS-95 density and IAPWS-2008 viscosity as tabulated by the NIST
// Chemistry WebBook (SRD 69) water isobar at 0.101 325 MPa, in 1 °C steps,
// found with the search tool in a public materials table that copies the NIST
// output. ITTC 7.5-02-01-03 Rev 02 (2011) Table 1 follows the same IAPWS
// formulations; its 10–40 °C densities (pp. 4–5, as quoted in a public C#
// test suite) agree with this table to the printed 4 decimals at every row
// except 12 °C (999.5004 in ITTC, 999.5003 here). The first row is 0.01 °C
// (triple point), below which NIST lists no liquid at 1 atm; 0–0.01 °C is a
// linear extrapolation.
var freshWater1Atm = [][3]float64{
	{0.01, 999.8438, 0.001791132}, {1, 999.9018, 0.001731021}, {2, 999.9430, 0.001673515},
	{3, 999.9672, 0.001619009}, {4, 999.9749, 0.001567292}, {5, 999.9666, 0.001518173},
	{6, 999.9429, 0.001471477}, {7, 999.9043, 0.001427043}, {8, 999.8510, 0.001384724},
	{9, 999.7836, 0.001344385}, {10, 999.7025, 0.001305900}, {11, 999.6079, 0.001269155},
	{12, 999.5003, 0.001234043}, {13, 999.3801, 0.001200468}, {14, 999.2474, 0.001168337},
	{15, 999.1026, 0.001137568}, {16, 998.9461, 0.001108081}, {17, 998.7780, 0.001079806},
	{18, 998.5986, 0.001052674}, {19, 998.4083, 0.001026624}, {20, 998.2072, 0.001001596},
	{21, 997.9955, 0.0009775372}, {22, 997.7735, 0.0009543962}, {23, 997.5414, 0.0009321258},
	{24, 997.2994, 0.0009106817}, {25, 997.0476, 0.0008900225}, {26, 996.7864, 0.0008701093},
	{27, 996.5158, 0.0008509058}, {28, 996.2360, 0.0008323778}, {29, 995.9471, 0.0008144932},
	{30, 995.6495, 0.0007972218}, {31, 995.3431, 0.0007805353}, {32, 995.0281, 0.0007644068},
	{33, 994.7048, 0.0007488114}, {34, 994.3731, 0.0007337251}, {35, 994.0333, 0.0007191256},
	{36, 993.6855, 0.0007049918}, {37, 993.3298, 0.0006913036}, {38, 992.9663, 0.0006780421},
	{39, 992.5951, 0.0006651895}, {40, 992.2164, 0.0006527287},
}

// seaWaterStd holds the density of standard seawater (S_A = 35.165 04 g/kg) at
// 0.101 325 MPa absolute (sea pressure 0, the same one-atmosphere basis as
// freshWater1Atm): {t °C, ρ kg/m³}.
//
// Source: TEOS-10 (IOC, SCOR and IAPSO 2010), gsw_rho_t_exact(S_A, t, p = 0)
// as computed by GSW-Python 3.6.16 (the Debian package python3-gsw), rounded
// to 4 decimals (docs/references.md §4.2). ITTC 7.5-02-01-03 Rev 02 (2011)
// Table 3 prints the same TEOS-10 function evaluated at a sea pressure of
// 10.1325 dbar, i.e. at two atmospheres absolute: every one of its 1–30 °C
// rows is this table plus the compression ρ·κ·Δp of 0.043–0.048 kg/m³
// (4.4·10⁻⁵ relative), so liftyard's seawater and fresh water now share one
// pressure basis.
var seaWaterStd = [][2]float64{
	{0.1, 1028.1017}, {1, 1028.0461}, {2, 1027.9720}, {3, 1027.8853}, {4, 1027.7864},
	{5, 1027.6756}, {6, 1027.5533}, {7, 1027.4197}, {8, 1027.2751}, {9, 1027.1198},
	{10, 1026.9541}, {11, 1026.7781}, {12, 1026.5921}, {13, 1026.3963}, {14, 1026.1909},
	{15, 1025.9760}, {16, 1025.7519}, {17, 1025.5187}, {18, 1025.2765}, {19, 1025.0256},
	{20, 1024.7660}, {21, 1024.4979}, {22, 1024.2215}, {23, 1023.9369}, {24, 1023.6442},
	{25, 1023.3436}, {26, 1023.0352}, {27, 1022.7191}, {28, 1022.3955}, {29, 1022.0644},
	{30, 1021.7261}, {31, 1021.3806}, {32, 1021.0281}, {33, 1020.6687}, {34, 1020.3026},
	{35, 1019.9298}, {36, 1019.5505}, {37, 1019.1649}, {38, 1018.7731}, {39, 1018.3753},
	{40, 1017.9715},
}

// interpTable interpolates y(x) on nodes xs by a cubic Lagrange polynomial
// through the four nearest nodes (two below and two above x where possible).
// It reproduces the nodes exactly; between 1 °C nodes of the water tables its
// error is far below the printed digits, where linear interpolation would be
// off by about 0.0015 kg/m³. Outside the nodes it extrapolates linearly from
// the first or last interval.
func interpTable(xs, ys []float64, x float64) float64 {
	n := len(xs)
	if x <= xs[0] {
		return ys[0] + (ys[1]-ys[0])*(x-xs[0])/(xs[1]-xs[0])
	}
	if x >= xs[n-1] {
		return ys[n-1] + (ys[n-1]-ys[n-2])*(x-xs[n-1])/(xs[n-1]-xs[n-2])
	}
	i := 0
	for i < n-2 && xs[i+1] <= x {
		i++
	}
	// x in [xs[i], xs[i+1]); use nodes i-1 … i+2 clipped to the table.
	lo := min(max(i-1, 0), n-4)
	y := 0.0
	for j := lo; j < lo+4; j++ {
		w := 1.0
		for m := lo; m < lo+4; m++ {
			if m != j {
				w *= (x - xs[m]) / (xs[j] - xs[m])
			}
		}
		y += w * ys[j]
	}
	return y
}

// Node columns of the tables, split once for interpTable.
var (
	fwT, fwRho, fwLnMu = splitFresh()
	swT, swRho         = splitSea()
)

func splitFresh() (t, rho, lnMu []float64) {
	for _, r := range freshWater1Atm {
		t = append(t, r[0])
		rho = append(rho, r[1])
		lnMu = append(lnMu, math.Log(r[2]))
	}
	return t, rho, lnMu
}

func splitSea() (t, rho []float64) {
	for _, r := range seaWaterStd {
		t = append(t, r[0])
		rho = append(rho, r[1])
	}
	return t, rho
}

// FreshWaterDensity returns the density of air-free fresh water at
// 0.101 325 MPa in kg/m³ for 0–40 °C, interpolated in the IAPWS-95 table that
// ITTC 7.5-02-01-03 (Rev 02, 2011) Table 1 tabulates (see freshWater1Atm).
func FreshWaterDensity(tempK float64) float64 {
	return interpTable(fwT, fwRho, tempK-273.15)
}

// FreshWaterMuPaS returns the dynamic viscosity of fresh water at
// 0.101 325 MPa in Pa·s for 0–40 °C: IAPWS-2008 values (the basis of the ITTC
// 7.5-02-01-03 Table 1 kinematic viscosities), interpolated in ln μ.
func FreshWaterMuPaS(tempK float64) float64 {
	return math.Exp(interpTable(fwT, fwLnMu, tempK-273.15))
}

// SeaWaterDensity returns the density of seawater at 0.101 325 MPa absolute
// (one atmosphere, as fresh water) in kg/m³ for 0–40 °C and absolute
// salinity s in kg/kg.
//
// At standard salinity it is TEOS-10 at sea pressure 0 (see seaWaterStd;
// ITTC 7.5-02-01-03 Table 3 is the same at two atmospheres). At
// other salinities the salt part is scaled by the shape of the one-atmosphere
// equation of state of Millero & Poisson (Deep-Sea Res. 28A (1981) 625,
// EOS-80):
//
//	ρ(t,S) = ρ_fw(t) + [ρ_sw(t) − ρ_fw(t)]·g(t,S)/g(t,S_std)
//	g(t,S) = A(t)·S + B(t)·S^{3/2} + C·S²   (S practical salinity ≈ S_A·35/35.165 04)
//
// so that S = 0 gives fresh water and S = S_std gives seaWaterStd exactly.
// Against TEOS-10 at 15 °C and sea pressure 0 for 10–40 g/kg (the rows of
// ITTC Table 4 less their two-atmosphere compression) this is within
// 0.035 kg/m³ (3.5·10⁻⁵ relative), negligible beside the other inputs of a
// lift coefficient.
func SeaWaterDensity(tempK, salinityKgPerKg float64) float64 {
	tC := tempK - 273.15
	fw := FreshWaterDensity(tempK)
	sw := interpTable(swT, swRho, tC)
	if salinityKgPerKg == StandardSalinityKgPerKg {
		return sw
	}
	t68 := tC * 1.00024
	sp := salinityKgPerKg * 1000 * 35 / 35.16504
	return fw + (sw-fw)*eos80Salt(t68, sp)/eos80Salt(t68, 35)
}

// eos80Salt is the salinity part of the Millero & Poisson (1981) one-atmosphere
// density of seawater, kg/m³ (t in °C IPTS-68, sp practical salinity).
func eos80Salt(t, sp float64) float64 {
	a := 8.24493e-1 + t*(-4.0899e-3+t*(7.6438e-5+t*(-8.2467e-7+t*5.3875e-9)))
	b := -5.72466e-3 + t*(1.0227e-4-t*1.6546e-6)
	const c = 4.8314e-4
	return a*sp + b*sp*math.Sqrt(sp) + c*sp*sp
}

// SeaWaterMuPaS returns the dynamic viscosity of seawater in Pa·s for
// 0–40 °C and absolute salinity s in kg/kg by the correlation of Sharqawy,
// Lienhard & Zubair (Desalination and Water Treatment 16 (2010) 354, eq. 22),
// which ITTC 7.5-02-01-03 (2011) uses for its seawater table:
//
//	μ_sw = μ_w·(1 + A·S + B·S²)
//	A = 1.541 + 1.998·10⁻²·t − 9.52·10⁻⁵·t²,  B = 7.974 − 7.561·10⁻²·t + 4.724·10⁻⁴·t²
//
// with μ_w from FreshWaterMuPaS (IAPWS-2008), t in °C and S in kg/kg.
func SeaWaterMuPaS(tempK, salinityKgPerKg float64) float64 {
	t := tempK - 273.15
	s := salinityKgPerKg
	a := 1.541 + 1.998e-2*t - 9.52e-5*t*t
	b := 7.974 - 7.561e-2*t + 4.724e-4*t*t
	return FreshWaterMuPaS(tempK) * (1 + a*s + b*s*s)
}
