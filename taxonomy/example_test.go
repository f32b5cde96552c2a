package taxonomy_test

import (
	"fmt"
	"os"

	"github.com/concord-labs/concord/taxonomy"
)

func ExampleParseString() {
	tx, err := taxonomy.ParseString(`# Labels for the sorting-line camera.
material | Material | anything sorted by what it is made of
  plastic | Plastic
    pet-bottle | PET bottle | clear or tinted drink bottle, often crushed flat
  metal
    aluminium-can | Aluminium can | light, thin-walled drink can
  paper
    cardboard | Cardboard | brown corrugated sheets and boxes
  glass
residual-waste | Residual waste | nothing any stream takes
`)
	if err != nil {
		fmt.Println(err)
		return
	}
	bottle, _ := tx.Lookup("pet-bottle")
	can, _ := tx.Lookup("aluminium-can")
	lca, _ := tx.LowestCommonAncestor(bottle, can)
	fmt.Println(tx.Path(bottle), tx.Node(bottle).Name, tx.Key(lca))
	fmt.Println(tx.Parents())
	_ = taxonomy.Format(os.Stdout, tx)
	// Output:
	// [material plastic pet-bottle] PET bottle material
	// [-1 0 1 0 3 0 5 0 -1]
	// material | Material | anything sorted by what it is made of
	//   plastic | Plastic
	//     pet-bottle | PET bottle | clear or tinted drink bottle, often crushed flat
	//   metal
	//     aluminium-can | Aluminium can | light, thin-walled drink can
	//   paper
	//     cardboard | Cardboard | brown corrugated sheets and boxes
	//   glass
	// residual-waste | Residual waste | nothing any stream takes
}

func ExampleParseString_errors() {
	_, err := taxonomy.ParseString("material\n  glass\n  paper\n   cardboard\n  glass | Glass\n")
	fmt.Println(err)
	// Output:
	// line 4, column 4: indented by 3 spaces, not a multiple of 2 (the indentation unit set by line 2)
	// line 5, column 3: duplicate key "glass" (first on line 2)
}
