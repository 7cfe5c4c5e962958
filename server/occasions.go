package server

import (
	"net/http"

	"github.com/labstack/echo/v4"

	"tagtally/capture"
)

func (s *Server) listOccasions(c echo.Context) error {
	st, err := s.store.GetStudy(c.Param("study"))
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"occasions": orNone(st.Occasions)})
}

// addOccasion appends one occasion. Index 0 (or left out) means the next
// index; windows must follow the existing ones in time (422 otherwise).
func (s *Server) addOccasion(c echo.Context) error {
	var o capture.Occasion
	if err := bindJSON(c, &o); err != nil {
		return err
	}
	_, err := s.editStudy(c.Param("study"), func(st *capture.Study) error {
		if o.Index == 0 {
			o.Index = len(st.Occasions) + 1
		}
		st.Occasions = append(st.Occasions, o)
		return nil
	})
	if err != nil {
		return err
	}
	return c.JSON(http.StatusCreated, o)
}

// replaceOccasions sets the study's whole list of occasions from a JSON
// array. Stored captures keep their records; histories re-derive
// occasions from the new windows.
func (s *Server) replaceOccasions(c echo.Context) error {
	var list []capture.Occasion
	if err := bindJSON(c, &list); err != nil {
		return err
	}
	st, err := s.editStudy(c.Param("study"), func(st *capture.Study) error {
		st.Occasions = list
		return nil
	})
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"occasions": orNone(st.Occasions)})
}

// orNone turns a nil slice into an empty one so JSON shows [] not null.
func orNone[T any](xs []T) []T {
	if xs == nil {
		return []T{}
	}
	return xs
}
