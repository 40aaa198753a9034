package families

// Clean are six landmark sets without any mistake, 30 to 90 landmarks,
// picking noise from none to realistic, over every warp kind.
func Clean() []Spec {
	return []Spec{
		{Name: "clean-bumps-30", Warps: []Warp{Bumps}, N: 30, Noise: LowNoise, Rotate: 12, SomaShare: 0.3},
		{Name: "clean-poly-45", Warps: []Warp{Smooth, Compression}, N: 45, Noise: RealNoise, Mirror: true, Rotate: -20, SomaShare: 0.3},
		{Name: "clean-bumps-60-exact", Warps: []Warp{Bumps, Compression}, N: 60, Noise: NoNoise, Mirror: true, Rotate: 35, SomaShare: 0.3},
		{Name: "clean-shear-60", Warps: []Warp{Shear, SmallBumps}, N: 60, Noise: RealNoise, Rotate: 5, SomaShare: 0.4},
		{Name: "clean-wide-75", Warps: []Warp{WideBumps, Smooth}, N: 75, Noise: LowNoise, Mirror: true, Rotate: 90, SomaShare: 0.3},
		{Name: "clean-bumps-90", Warps: []Warp{Bumps, Shear}, N: 90, Noise: RealNoise, Rotate: -45, SomaShare: 0.3},
	}
}

// Mistakes are ten realistic scenarios with two planted mistakes each: a
// wrong correspondence and a wrong section, the second on the first's
// nearest neighbour (where the first masks it), or two of a kind.
func Mistakes() []Spec {
	two := []string{WrongCorrespondence, WrongSection}
	return []Spec{
		{Name: "m-bumps-24", Warps: []Warp{Bumps}, N: 24, Noise: RealNoise, Rotate: 10, SomaShare: 0.3, Mistakes: two},
		{Name: "m-poly-30", Warps: []Warp{Smooth}, N: 30, Noise: RealNoise, Mirror: true, SomaShare: 0.3, Mistakes: two},
		{Name: "m-compress-40", Warps: []Warp{Compression, Bumps}, N: 40, Noise: RealNoise, Rotate: -30, SomaShare: 0.3, Mistakes: two},
		{Name: "m-shear-50", Warps: []Warp{Shear}, N: 50, Noise: RealNoise, Mirror: true, Rotate: 60, SomaShare: 0.3, Mistakes: two},
		{Name: "m-small-60", Warps: []Warp{SmallBumps, Compression}, N: 60, Noise: RealNoise, SomaShare: 0.4, Mistakes: two},
		{Name: "m-wide-60", Warps: []Warp{WideBumps}, N: 60, Noise: RealNoise, Mirror: true, Rotate: 15, SomaShare: 0.3, Mistakes: []string{WrongCorrespondence, WrongCorrespondence}},
		{Name: "m-bumps-80", Warps: []Warp{Bumps, Smooth}, N: 80, Noise: RealNoise, Rotate: 120, SomaShare: 0.3, Mistakes: two},
		{Name: "m-bumps-100", Warps: []Warp{Bumps, Compression}, N: 100, Noise: RealNoise, Mirror: true, SomaShare: 0.3, Mistakes: []string{WrongSection, WrongSection}},
		{Name: "m-shear-150", Warps: []Warp{Shear, SmallBumps}, N: 150, Noise: RealNoise, Rotate: -75, SomaShare: 0.3, Mistakes: two},
		{Name: "m-all-300", Warps: []Warp{Bumps, Shear, Compression}, N: 300, Noise: RealNoise, Mirror: true, Rotate: 25, SomaShare: 0.3, Mistakes: two},
	}
}
