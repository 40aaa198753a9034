package simulate

import (
	"testing"

	"ferry/transform"
)

// The pictures show the tissue where the truth puts it: the in vivo stack
// is bright on a vessel's axis and dim away from every structure, and the
// EM plane is pale inside a vessel that crosses it.
func TestImagesDrawTheTissue(t *testing.T) {
	s, err := Generate(SmallParams(), 3)
	if err != nil {
		t.Fatal(err)
	}
	ip := s.DefaultImageParams()
	st, err := s.InVivoStack(ip)
	if err != nil {
		t.Fatal(err)
	}
	seg := s.Vessels[0]
	mid := seg.Start.Add(seg.End).Scale(0.5)
	voxel := func(p transform.Vec) (int, int, int) {
		return int(p[0]/ip.SourceVoxelUM[0] + 0.5), int(p[1]/ip.SourceVoxelUM[1] + 0.5), int(p[2]/ip.SourceVoxelUM[2] + 0.5)
	}
	i, j, k := voxel(mid)
	if v := st.At(i, j, k); v < 150 {
		t.Errorf("vessel axis at %v has value %d, want bright", mid, v)
	}
	pl, err := s.EMPlane(ip)
	if err != nil {
		t.Fatal(err)
	}
	if pl.Width < 100 || pl.Height < 100 || pl.Depth != 1 {
		t.Fatalf("EM plane %d×%d×%d", pl.Width, pl.Height, pl.Depth)
	}
	var pale int
	for _, v := range pl.Data {
		if v > 200 {
			pale++
		}
	}
	if pale == 0 {
		t.Error("no vessel lumen crosses the EM plane")
	}
}

// The EM stack records its voxel size and origin, as the other rendered
// images do, so that review places it without flags.
func TestEMStackRecordsItsGeometry(t *testing.T) {
	s, err := Generate(SmallParams(), 3)
	if err != nil {
		t.Fatal(err)
	}
	ip := ImageParams{TargetVoxelUM: transform.Vec{4, 4, 8}}
	st, err := s.EMStack(ip)
	if err != nil {
		t.Fatal(err)
	}
	if g := st.Geometry; g.VoxelUM != ip.TargetVoxelUM || g.HasOrigin != [3]bool{true, true, true} || g.OriginUM != (transform.Vec{}) {
		t.Errorf("EM stack records %+v, want voxels %v at the origin", g, ip.TargetVoxelUM)
	}
}
